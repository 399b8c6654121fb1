"""Calibration: fit a runner model's loss coefficients to the unit's own reference data.

The reference data are acceptance- or commissioning-test points of the prototype (IEC 60041
field tests), or model-test points stepped up to the prototype (IEC 60193; see
:mod:`analytics.similarity`). Each point gives the net head and the turbine efficiency and
at least one of shaft power and flow; the opening (and Kaplan blade angle) where recorded.

The fit is a bounded nonlinear least-squares problem (``scipy.optimize.least_squares``,
trust-region reflective) on the residuals

* efficiency: ``eta_model - eta_point`` (fraction),
* power: ``P_model / P_point - 1`` where the point has an opening (else power is the input),
* flow: ``Q_model / Q_point - 1`` where the point has both an opening and a flow,

where a point without an opening is evaluated at its power (or flow) on a hill chart of the
point's head (:func:`analytics.hillchart.build_hill_chart`), so that no opening law has to
be guessed for it.

A fit is refused (:class:`CalibrationError`, with the reason) when it is physically absurd:
an efficiency at or above 1 anywhere on the unit's operating grid, a negative loss power, an
energy balance that does not close, or residuals larger than ``max_rms`` (the model cannot
represent the data: the geometry or the points are wrong).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import least_squares

from analytics.hillchart import DEFAULT_OPENINGS, build_hill_chart
from analytics.runners.base import G_DEFAULT, RHO_DEFAULT, RunnerModel

#: Refuse a fit whose RMS efficiency residual exceeds this (fraction; 0.01 = one point).
DEFAULT_MAX_RMS = 0.01


class CalibrationError(ValueError):
    """The reference data cannot be fitted, or the fit is physically absurd."""


@dataclass(frozen=True)
class ReferenceData:
    """Reference points of one unit, as arrays of equal length (NaN where not recorded).

    Attributes
    ----------
    head : [m] net head
    efficiency : turbine efficiency, fraction
    power : [W] turbine shaft power
    flow : [m3/s]
    opening : fraction of the regulating organ
    blade_angle : [rad] Kaplan blade angle
    """

    head: NDArray
    efficiency: NDArray
    power: NDArray
    flow: NDArray
    opening: NDArray
    blade_angle: NDArray

    @classmethod
    def from_arrays(cls, head: ArrayLike, efficiency: ArrayLike, *,
                    power: ArrayLike | None = None, flow: ArrayLike | None = None,
                    opening: ArrayLike | None = None,
                    blade_angle: ArrayLike | None = None) -> ReferenceData:
        """Build from arrays; any of the optional ones may be None (all NaN)."""
        h = np.asarray(head, dtype=float)

        def opt(a: ArrayLike | None) -> NDArray:
            return np.full(h.shape, np.nan) if a is None else np.asarray(a, dtype=float)

        data = cls(h, np.asarray(efficiency, dtype=float), opt(power), opt(flow),
                   opt(opening), opt(blade_angle))
        data.check()
        return data

    def check(self) -> None:
        """Raise CalibrationError naming the first unusable point."""
        n = self.head.size
        for name in ("efficiency", "power", "flow", "opening", "blade_angle"):
            if getattr(self, name).shape != (n,):
                raise CalibrationError(f"reference data: '{name}' has {getattr(self, name).size} "
                                       f"values for {n} heads")
        if n == 0:
            raise CalibrationError("reference data: no points")
        for k in range(n):
            where = f"reference point {k + 1}"
            if not self.head[k] > 0:
                raise CalibrationError(f"{where}: net head must be > 0 m, got {self.head[k]}")
            if not 0 < self.efficiency[k] < 1:
                raise CalibrationError(f"{where}: efficiency must be in (0, 1), "
                                       f"got {self.efficiency[k]}")
            if np.isnan(self.power[k]) and np.isnan(self.flow[k]):
                raise CalibrationError(f"{where}: needs a power or a flow")
            # the fit divides by them (relative residuals) and reads the chart at them
            for name, unit in (("power", "W"), ("flow", "m3/s")):
                value = getattr(self, name)[k]
                if not np.isnan(value) and not (np.isfinite(value) and value > 0):
                    raise CalibrationError(f"{where}: {name} must be > 0 {unit}, got {value}")


@dataclass(frozen=True)
class CalibrationResult:
    """A fitted model and how well it fits.

    Attributes
    ----------
    model : the calibrated model
    coefficients : name -> fitted value
    fitted : names of the coefficients that were free in the fit
    efficiency_residuals : (n,) model minus point efficiency (fraction), per point
    rms_efficiency : RMS of ``efficiency_residuals`` (fraction)
    max_abs_efficiency : largest absolute efficiency residual (fraction)
    power_residuals, flow_residuals : (n,) relative residuals where defined (NaN elsewhere)
    at_bounds : names of coefficients that ended on a bound (worth a look)
    """

    model: RunnerModel
    coefficients: dict[str, float]
    fitted: tuple[str, ...]
    efficiency_residuals: NDArray
    rms_efficiency: float
    max_abs_efficiency: float
    power_residuals: NDArray
    flow_residuals: NDArray
    at_bounds: tuple[str, ...] = field(default=())


def _model_at_points(model: RunnerModel, data: ReferenceData, speed: float, rho: float,
                     g: float, openings: NDArray, modes: Sequence[int] | None = None
                     ) -> tuple[NDArray, NDArray, NDArray]:
    """Model efficiency, power and flow at each reference point (NaN where unreachable)."""
    n = data.head.size
    eta = np.full(n, np.nan)
    power = np.full(n, np.nan)
    flow = np.full(n, np.nan)
    has_opening = np.isfinite(data.opening)
    if has_opening.any():
        blade = data.blade_angle[has_opening]
        sol = model.solve(data.head[has_opening], speed, data.opening[has_opening],
                          blade_angle=None if np.isnan(blade).all() else blade, rho=rho, g=g)
        eta[has_opening] = sol.efficiency
        power[has_opening] = sol.shaft_power
        flow[has_opening] = sol.flow
    rest = ~has_opening
    if rest.any():
        heads = np.unique(data.head[rest])
        chart = build_hill_chart(model, heads=_grid_heads(heads), speed=speed,
                                 openings=openings, modes=modes, rho=rho, g=g)
        by_power = rest & np.isfinite(data.power)
        eta[by_power] = chart.efficiency_at_power(data.power[by_power], data.head[by_power])
        by_flow = rest & ~by_power
        eta[by_flow] = chart.efficiency_at_flow(data.flow[by_flow], data.head[by_flow])
    return eta, power, flow


def _grid_heads(heads: NDArray) -> NDArray:
    """A strictly ascending head grid that contains every head (one point gets a neighbour)."""
    if heads.size == 1:
        return np.array([heads[0] * 0.999, heads[0] * 1.001])
    return heads


def calibrate(model: RunnerModel, data: ReferenceData, *, speed: float,
              fit: Sequence[str] | None = None, rho: float = RHO_DEFAULT,
              g: float = G_DEFAULT, max_rms: float = DEFAULT_MAX_RMS,
              check_heads: ArrayLike | None = None,
              openings: ArrayLike = DEFAULT_OPENINGS,
              modes: Sequence[int] | None = None) -> CalibrationResult:
    """Fit ``model``'s loss coefficients to ``data`` by bounded least squares.

    Parameters
    ----------
    model : starting model (its coefficients are the initial guess)
    data : the unit's reference points
    speed : [rad/s] the speed the points were taken at (synchronous speed)
    fit : coefficient names to fit (default: all of the model's)
    rho, g : [kg/m3], [m/s2] of the tests
    max_rms : refuse the fit above this RMS efficiency residual (fraction)
    check_heads : [m] heads over which the fitted model is checked for absurd values
        (default: the span of the points, widened by 10 %)
    openings : regulating-organ grid for points without an opening
    modes : Pelton jet counts the unit runs (points without an opening take the best)

    Returns
    -------
    CalibrationResult

    Raises
    ------
    CalibrationError with the reason when the fit fails or is physically absurd.

    References
    ----------
    Branch, Coleman & Li (1999), a subspace, interior and conjugate gradient method for
    large-scale bound-constrained minimization (the "trf" method of scipy's least_squares).
    """
    data.check()
    names = tuple(fit) if fit is not None else tuple(model.coefficient_names)
    unknown = [n for n in names if n not in model.coefficient_names]
    if unknown:
        raise CalibrationError(f"unknown coefficient(s) {unknown}; the model has "
                               f"{list(model.coefficient_names)}")
    has_opening = np.isfinite(data.opening)
    has_power = has_opening & np.isfinite(data.power)
    has_flow = has_opening & np.isfinite(data.flow)
    # one efficiency residual per point, plus power and flow where the point has an opening
    n_residuals = data.head.size + int(has_power.sum()) + int(has_flow.sum())
    if n_residuals < len(names):
        raise CalibrationError(f"{data.head.size} reference point(s) give {n_residuals} "
                               f"residual(s), too few to determine {len(names)} "
                               f"coefficients {list(names)}")
    bounds = model.coefficient_bounds()
    low = np.array([bounds[n][0] for n in names], dtype=float)
    high = np.array([bounds[n][1] for n in names], dtype=float)
    start = np.clip(np.array([model.coefficients[n] for n in names], dtype=float), low, high)
    scale = np.where(np.isfinite(high) & (high > low), high - low, np.maximum(np.abs(start), 1.0))
    y = np.asarray(openings, dtype=float)

    def residuals(values: NDArray) -> NDArray:
        trial = model.with_coefficients(dict(zip(names, values, strict=True)))
        eta, power, flow = _model_at_points(trial, data, speed, rho, g, y, modes)
        parts = [eta - data.efficiency,
                 power[has_power] / data.power[has_power] - 1.0,
                 flow[has_flow] / data.flow[has_flow] - 1.0]
        r = np.concatenate(parts)
        return np.where(np.isfinite(r), r, 1.0)  # an unreachable point costs a full unit

    result = least_squares(residuals, start, bounds=(low, high), x_scale=scale,
                           method="trf", xtol=1e-10, ftol=1e-12, gtol=1e-12, max_nfev=400)
    if not result.success:
        raise CalibrationError(f"the fit did not converge: {result.message}")
    fitted = model.with_coefficients(dict(zip(names, result.x, strict=True)))
    eta, power, flow = _model_at_points(fitted, data, speed, rho, g, y, modes)
    unreachable = ~np.isfinite(eta)
    if unreachable.any():
        idx = (np.flatnonzero(unreachable) + 1).tolist()
        raise CalibrationError(f"reference point(s) {idx} are outside what the fitted model "
                               "can reach (check head, power and flow)")
    eta_res = eta - data.efficiency
    rms = float(np.sqrt(np.mean(eta_res**2)))
    if rms > max_rms:
        raise CalibrationError(
            f"the model cannot represent the reference data: RMS efficiency residual "
            f"{100 * rms:.2f} points exceeds {100 * max_rms:.2f} (check the geometry, the "
            f"speed and the points)")
    _refuse_absurd(fitted, data, speed=speed, rho=rho, g=g, check_heads=check_heads)
    at_bounds = tuple(n for n, v, lo, hi in zip(names, result.x, low, high, strict=True)
                      if np.isclose(v, lo, rtol=0, atol=1e-9 * max(1.0, abs(lo)))
                      or np.isclose(v, hi, rtol=0, atol=1e-9 * max(1.0, abs(hi))))
    p_res = np.full(data.head.shape, np.nan)
    q_res = np.full(data.head.shape, np.nan)
    p_res[has_power] = power[has_power] / data.power[has_power] - 1.0
    q_res[has_flow] = flow[has_flow] / data.flow[has_flow] - 1.0
    return CalibrationResult(
        model=fitted, coefficients=dict(fitted.coefficients), fitted=names,
        efficiency_residuals=eta_res, rms_efficiency=rms,
        max_abs_efficiency=float(np.max(np.abs(eta_res))), power_residuals=p_res,
        flow_residuals=q_res, at_bounds=at_bounds,
    )


def _refuse_absurd(model: RunnerModel, data: ReferenceData, *, speed: float, rho: float,
                   g: float, check_heads: ArrayLike | None) -> None:
    """Raise CalibrationError where the fitted model breaks physics on the operating grid."""
    if check_heads is None:
        lo, hi = float(np.min(data.head)), float(np.max(data.head))
        check_heads = np.linspace(0.9 * lo, 1.1 * hi, 7)
    heads = np.asarray(check_heads, dtype=float)
    openings = np.linspace(0.05, 1.0, 20)
    hh, yy = np.meshgrid(heads, openings, indexing="ij")
    sol = model.solve(hh, speed, yy, rho=rho, g=g)
    eta = sol.efficiency
    if np.nanmax(eta, initial=0.0) >= 1.0:
        k = np.unravel_index(np.nanargmax(eta), eta.shape)
        raise CalibrationError(
            f"fitted model is absurd: efficiency {eta[k]:.4f} >= 1 at head {hh[k]:.2f} m, "
            f"opening {yy[k]:.2f}")
    for name, loss in sol.losses.items():
        worst = np.nanmin(loss, initial=0.0)
        if worst < -1e-6 * np.nanmax(np.abs(sol.hydraulic_power), initial=1.0):
            raise CalibrationError(f"fitted model is absurd: loss '{name}' is negative "
                                   f"({worst:.4g} W)")
    residual = sol.balance_residual()
    scale = np.nanmax(np.abs(sol.hydraulic_power), initial=1.0)
    if np.nanmax(np.abs(residual), initial=0.0) > 1e-6 * scale:
        raise CalibrationError("fitted model's energy balance does not close")


def coefficients_table(result: CalibrationResult) -> Mapping[str, float]:
    """The fitted coefficients in the model's order (for storage and display)."""
    return {n: float(result.coefficients[n]) for n in result.model.coefficient_names}
