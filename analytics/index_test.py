"""Index-test efficiency from plant data: net head, Winter-Kennedy flow, index efficiency.

The index method (IEC 60041:1991, clause 15 "index tests", and ASME PTC 18-2002, the
index-testing paragraphs 4G; clause numbers from memory) measures a *relative* flow, so the
efficiency it gives is relative: ``eta_raw = P_turbine / (rho g Q_i H)`` with ``Q_i = k dp^n``
and ``k`` unknown unless calibrated against an absolute flow measurement. A wrong ``k`` scales
every ``eta_raw`` by the same factor. The *index constant* removes that factor once per
reference epoch, by matching the index efficiency to the unit's reference curve over a
baseline period; afterwards it is fixed, so that a later loss shows as a deviation instead of
being absorbed into the constant.

Functions take scalars, numpy arrays or pandas Series (broadcast together) and return the
same kind: a Series in (any argument) gives a Series out on that index, all scalars give a
float. Invalid states (no flow, no head, negative differential pressure) give NaN, never an
exception for one bad sample.

Sign conventions: levels and elevations [m] positive upwards above a common datum; flow
[m3/s] positive in the turbine direction; power [W] positive when generating.

Results inform people who operate machines: the service advises, it never commands a unit;
operating limits, protection settings, local codes and licensed practice always prevail.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import pandas as pd

ArrayLike = float | npt.NDArray[np.float64] | pd.Series

#: Scale factor from the median absolute deviation to the standard deviation of a normal
#: distribution, 1/Phi^-1(3/4) (Rousseeuw & Croux 1993, J. Am. Stat. Assoc. 88, 1273).
MAD_TO_SIGMA = 1.482602218505602
#: Asymptotic standard error of the sample median of a normal sample, sqrt(pi/2) sigma/sqrt(n)
#: (Kendall & Stuart, The Advanced Theory of Statistics, vol. 1; from memory).
MEDIAN_SE_FACTOR = float(np.sqrt(np.pi / 2.0))
#: Default minimum number of baseline steady windows for an index constant (common practice:
#: with 30 points the median's standard error is about 0.23 of the point-to-point scatter).
INDEX_CONSTANT_MIN_POINTS = 30


def _like(values: npt.NDArray[np.float64], *inputs: object) -> ArrayLike:
    """Return ``values`` as the kind of the inputs: Series if any is one, float if 0-d."""
    for item in inputs:
        if isinstance(item, pd.Series):
            return pd.Series(np.broadcast_to(values, item.shape), index=item.index)
    if np.ndim(values) == 0:
        return float(values)
    return values


def _f(x: object) -> npt.NDArray[np.float64]:
    return np.asarray(x, dtype=np.float64)


def velocity_head(flow: ArrayLike, area: ArrayLike, g: ArrayLike = 9.81) -> ArrayLike:
    """Mean velocity head of a section, ``v^2 / (2 g)`` with ``v = Q / A``.

    Parameters
    ----------
    flow : float or array [m3/s]
    area : float or array [m2]
        Cross-section of the reference section; non-positive gives NaN.
    g : float or array [m/s2]

    Returns
    -------
    float or array [m]

    References
    ----------
    IEC 60041:1991, 2.3 (kinetic term of the specific energy at a section, ``v^2/2``, with the
    mean velocity ``Q/A``; from memory).
    """
    q, a = _f(flow), _f(area)
    with np.errstate(invalid="ignore", divide="ignore"):
        v = np.where(a > 0.0, q / a, np.nan)
    return _like(v * v / (2.0 * _f(g)), flow, area)


def net_head(headwater_level: ArrayLike, low_reference_level: ArrayLike, *,
             flow: ArrayLike | None = None, penstock_loss_coefficient: ArrayLike = 0.0,
             inlet_area: ArrayLike | None = None, outlet_area: ArrayLike | None = None,
             g: ArrayLike = 9.81) -> ArrayLike:
    """Net head between the turbine's high- and low-pressure reference sections.

    Parameters
    ----------
    headwater_level : float or array [m]
        Level of the water on the high-pressure side. Either the headwater (reservoir or
        forebay) surface, or the piezometric level at the high-pressure section (a pressure
        reading converted to an elevation; see :func:`net_head_from_pressure`).
    low_reference_level : float or array [m]
        Piezometric level at the low-pressure reference section: the tailwater level at the
        draft-tube outlet for reaction machines (Francis, Kaplan). For a Pelton turbine the
        low-pressure reference is the elevation of the point where the jet axis touches the
        runner's pitch circle (for a vertical-axis machine, the plane of the jets; IEC 60041,
        from memory); pass that elevation here and no ``outlet_area``.
    flow : float or array [m3/s], optional
        Turbine flow; needed for the penstock loss and the velocity heads.
    penstock_loss_coefficient : float or array [m/(m3/s)^2], default 0
        ``k_p`` of the loss ``k_p Q^2`` between the headwater and the high-pressure section
        (trash rack, intake, penstock), which is not charged to the turbine.
    inlet_area : float or array [m2], optional
        Area of the high-pressure section. Give it only where ``headwater_level`` is a
        piezometric level at that section: a reservoir surface has no velocity, and the
        kinetic energy at the section is already part of ``z_hw - k_p Q^2``.
    outlet_area : float or array [m2], optional
        Area of the low-pressure section (draft-tube outlet); its kinetic energy leaves the
        machine and is subtracted (not charged to the turbine).
    g : float or array [m/s2]
        Local acceleration of gravity.

    Returns
    -------
    float or array [m]
        NaN where an input is NaN.

    Notes
    -----
    ``H = z_hw - z_low - k_p Q^2 + v1^2/(2g) - v2^2/(2g)``, ``v1 = Q/A1``, ``v2 = Q/A2``; each
    velocity term only where its area is given. The specific hydraulic energy of the machine
    is ``E = g H``.

    References
    ----------
    IEC 60041:1991, 2.3, definitions of the specific hydraulic energy of the machine and of
    the net head between the high- and low-pressure reference sections (from memory).
    ASME PTC 18-2002, section 2 and para. 3 on which head losses are charged to the machine:
    losses upstream of the high-pressure section and the discharge velocity head at the
    conduit exit are not charged to the turbine.
    """
    head = _f(headwater_level) - _f(low_reference_level)
    needs_flow = (inlet_area is not None or outlet_area is not None
                  or np.any(_f(penstock_loss_coefficient) != 0.0))
    if flow is None:
        if needs_flow:
            raise ValueError("net_head: flow is required for the penstock loss and the "
                             "velocity-head terms (penstock_loss_coefficient, inlet_area, "
                             "outlet_area)")
        return _like(head, headwater_level, low_reference_level)
    q = _f(flow)
    head = head - _f(penstock_loss_coefficient) * q * q
    if inlet_area is not None:
        head = head + _f(velocity_head(q, _f(inlet_area), g))
    if outlet_area is not None:
        head = head - _f(velocity_head(q, _f(outlet_area), g))
    return _like(head, headwater_level, low_reference_level, flow)


def net_head_from_pressure(inlet_pressure: ArrayLike, gauge_elevation: ArrayLike,
                           low_reference_level: ArrayLike, *, rho: ArrayLike,
                           flow: ArrayLike | None = None, inlet_area: ArrayLike | None = None,
                           outlet_area: ArrayLike | None = None, g: ArrayLike = 9.81,
                           air_density: ArrayLike = 0.0) -> ArrayLike:
    """Net head from the gauge pressure at the high-pressure section (spiral-case inlet).

    Parameters
    ----------
    inlet_pressure : float or array [Pa]
        Gauge pressure (above the local atmosphere) at the high-pressure section.
    gauge_elevation : float or array [m]
        Elevation to which the pressure reading refers (transducer or its zero reference).
    low_reference_level : float or array [m]
        As in :func:`net_head` (tailwater level; Pelton: jet-circle plane).
    rho : float or array [kg/m3]
        Water density at the section.
    flow : float or array [m3/s], optional
        Needed for the velocity heads.
    inlet_area, outlet_area : float or array [m2], optional
        Areas of the high- and low-pressure sections; each velocity term only where given.
    g : float or array [m/s2]
    air_density : float or array [kg/m3], default 0 (neglected)
        Density of the air column between the gauge and the tailwater surface. The
        atmosphere is lighter at the upper of the two, which adds
        ``(rho_air/rho)(z_low - z_gauge)`` to the head: about 1.2 mm per metre of level
        difference, negligible where gauge and tailwater are close.

    Returns
    -------
    float or array [m]

    Notes
    -----
    ``H = p1/(rho g) + z_gauge + v1^2/(2g) - z_low - v2^2/(2g) + (rho_air/rho)(z_low - z_gauge)``

    References
    ----------
    IEC 60041:1991, 2.3 (total specific energy at a section, ``p/rho + g z + v^2/2``) and its
    correction for the difference of atmospheric pressure between the reference sections
    (from memory). ASME PTC 18-2002, section 2, net head definition.
    """
    r = _f(rho)
    if (inlet_area is not None or outlet_area is not None) and flow is None:
        raise ValueError("net_head_from_pressure: flow is required for the velocity-head terms")
    piezometric = _f(inlet_pressure) / (r * _f(g)) + _f(gauge_elevation)
    head = piezometric - _f(low_reference_level)
    head = head + _f(air_density) / r * (_f(low_reference_level) - _f(gauge_elevation))
    if inlet_area is not None:
        head = head + _f(velocity_head(_f(flow), _f(inlet_area), g))
    if outlet_area is not None:
        head = head - _f(velocity_head(_f(flow), _f(outlet_area), g))
    return _like(head, inlet_pressure, gauge_elevation, low_reference_level, flow)


def winter_kennedy_flow(dp: ArrayLike, coefficient: ArrayLike = 1.0,
                        exponent: ArrayLike = 0.5) -> ArrayLike:
    """Flow index from the Winter-Kennedy differential pressure, ``Q_i = k dp^n``.

    Parameters
    ----------
    dp : float or array [Pa]
        Differential pressure between the outer and inner spiral-case taps. Negative or NaN
        (reversed taps, a blocked line, a sensor fault) gives NaN.
    coefficient : float or array [m3/s / Pa^n], default 1
        ``k``. With the default 1 the result is a relative flow (index units), which is all
        the index method needs once the index constant is applied.
    exponent : float or array [-], default 0.5
        ``n``; 0.5 for the ideal law, in practice 0.48-0.52 from a calibration (from memory).

    Returns
    -------
    float or array [m3/s], or relative units when ``k`` is not calibrated

    Notes
    -----
    The pressure difference across the spiral case is a centripetal one and grows with the
    square of the velocity, hence ``Q proportional to sqrt(dp)`` for ``n = 0.5``.

    References
    ----------
    I. A. Winter and A. M. Kennedy, "Improved type of flow meter for hydraulic turbines",
    Proc. ASCE 59 (1933) (from memory). IEC 60041:1991, clause 15 (index tests, spiral-case
    taps). ASME PTC 18-2002, 4G (index method: ``Q = k dp^n``).
    """
    d = _f(dp)
    with np.errstate(invalid="ignore"):
        q = np.where(d >= 0.0, _f(coefficient) * np.abs(d) ** _f(exponent), np.nan)
    return _like(q, dp)


def generator_efficiency(power: ArrayLike, curve_power: ArrayLike | None,
                         curve_efficiency: ArrayLike) -> ArrayLike:
    """Generator efficiency at an output power, from the manufacturer's curve.

    Parameters
    ----------
    power : float or array [W]
        Generator (electrical) output.
    curve_power : array [W] or None
        Powers of the curve, strictly increasing. None (or a scalar) with a scalar
        ``curve_efficiency`` means a constant efficiency.
    curve_efficiency : array or float [-]
        Efficiencies (fractions in (0, 1]) at ``curve_power``.

    Returns
    -------
    float or array [-]
        Piecewise-linear interpolation, held constant beyond the ends of the curve; NaN
        where ``power`` is NaN.

    References
    ----------
    IEC 60034-2-1 gives how a generator's losses, hence this curve, are determined; the
    index method uses the curve as supplied (IEC 60041:1991, clause 15; from memory).
    """
    p = _f(power)
    eff = _f(curve_efficiency)
    if np.any(~np.isfinite(eff)) or np.any(eff <= 0.0) or np.any(eff > 1.0):
        raise ValueError("generator_efficiency: curve_efficiency must be fractions in (0, 1], "
                         f"got {eff.tolist()}")
    if eff.ndim == 0:
        out = np.where(np.isnan(p), np.nan, float(eff))
        return _like(out, power)
    xp = _f(curve_power)
    if xp.ndim != 1 or xp.shape != eff.shape or xp.size < 1:
        raise ValueError("generator_efficiency: curve_power and curve_efficiency must be 1-D "
                         f"of the same length, got shapes {xp.shape} and {eff.shape}")
    if np.any(np.diff(xp) <= 0.0) or not np.all(np.isfinite(xp)):
        raise ValueError("generator_efficiency: curve_power must be finite and strictly "
                         "increasing")
    return _like(np.interp(p, xp, eff), power)


def turbine_power(generator_power: ArrayLike, generator_eff: ArrayLike) -> ArrayLike:
    """Turbine shaft power from the generator output, ``P_t = P_gen / eta_gen``.

    Parameters
    ----------
    generator_power : float or array [W]
    generator_eff : float or array [-]
        Non-positive gives NaN.

    Returns
    -------
    float or array [W]

    References
    ----------
    IEC 60041:1991, clause 15 / ASME PTC 18-2002, 4G: the turbine power in an index test is
    the generator output divided by the generator efficiency (from memory).
    """
    eg = _f(generator_eff)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(eg > 0.0, _f(generator_power) / eg, np.nan)
    return _like(out, generator_power, generator_eff)


def hydraulic_power(flow: ArrayLike, head: ArrayLike, rho: ArrayLike, g: ArrayLike) -> ArrayLike:
    """Hydraulic power ``P_h = rho g Q H = rho Q E``.

    Parameters
    ----------
    flow : float or array [m3/s]
    head : float or array [m] net head
    rho : float or array [kg/m3]
    g : float or array [m/s2]

    Returns
    -------
    float or array [W]

    References
    ----------
    IEC 60041:1991, 2.3 (hydraulic power ``P_h = E (rho Q)``; from memory).
    """
    return _like(_f(rho) * _f(g) * _f(flow) * _f(head), flow, head)


def index_efficiency(generator_power: ArrayLike, generator_eff: ArrayLike, flow: ArrayLike,
                     head: ArrayLike, rho: ArrayLike, g: ArrayLike) -> ArrayLike:
    """Index (relative) turbine efficiency, ``eta = (P_gen/eta_gen) / (rho g Q H)``.

    Parameters
    ----------
    generator_power : float or array [W]
    generator_eff : float or array [-]
    flow : float or array [m3/s] (or index units from :func:`winter_kennedy_flow`)
    head : float or array [m] net head
    rho : float or array [kg/m3] water density
    g : float or array [m/s2] local gravity

    Returns
    -------
    float or array [-]
        NaN where ``flow <= 0``, ``head <= 0`` or ``generator_eff <= 0``. With an
        uncalibrated flow index the value is relative: only its changes mean something
        until :class:`IndexConstant` is applied.

    References
    ----------
    IEC 60041:1991, clause 15 (index tests); ASME PTC 18-2002, 4G (index method).
    """
    q, h = _f(flow), _f(head)
    p_t = _f(turbine_power(_f(generator_power), _f(generator_eff)))
    p_h = _f(hydraulic_power(q, h, rho, g))
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = np.where((q > 0.0) & (h > 0.0), p_t / p_h, np.nan)
    return _like(eta, generator_power, generator_eff, flow, head)


@dataclass(frozen=True)
class IndexConstant:
    """The factor that turns raw index efficiencies into efficiencies on the reference scale.

    Attributes
    ----------
    value : [-] ``K``; the index efficiency is ``eta_raw / K``
    spread : [-] robust standard deviation of the baseline ratios (1.4826 x MAD)
    standard_error : [-] standard error of ``value`` (``sqrt(pi/2) spread / sqrt(n)``)
    n_used : number of baseline points that entered the estimate
    n_excluded : baseline points left out (NaN, non-positive efficiency)
    """

    value: float
    spread: float
    standard_error: float
    n_used: int
    n_excluded: int

    @property
    def relative_standard_error(self) -> float:
        """``standard_error / value`` [-]: the efficiency-scale uncertainty it carries."""
        return self.standard_error / self.value

    def apply(self, eta_raw: ArrayLike) -> ArrayLike:
        """Index efficiency on the reference scale, ``eta_raw / value`` [-]."""
        return _like(_f(eta_raw) / self.value, eta_raw)


def index_constant(eta_raw: ArrayLike, eta_ref: ArrayLike, *,
                   min_points: int = INDEX_CONSTANT_MIN_POINTS) -> IndexConstant:
    """Index constant of a reference epoch: ``K = median(eta_raw / eta_ref)`` over a baseline.

    Parameters
    ----------
    eta_raw : array [-]
        Raw index efficiencies of the baseline period's steady windows.
    eta_ref : array [-]
        Reference efficiency (the unit's reference model) at the same head and power.
    min_points : int, default 30
        Fewest usable baseline points; fewer raise ``ValueError``.

    Returns
    -------
    IndexConstant

    Raises
    ------
    ValueError
        When the shapes differ or fewer than ``min_points`` pairs are usable (finite and
        positive); the message gives the counts.

    Notes
    -----
    The flow index ``k dp^n`` with an unknown ``k`` scales every efficiency by ``1/k``, so
    the constant is a ratio, not an offset. The estimator is the median of the pointwise
    ratios over all the baseline's steady windows: it uses the whole measured curve (not only
    its peak, which rests on a few noisy points and on where the peak happens to fall), and
    a minority of bad windows (a sensor spike, an unflagged transient) cannot move it.
    Its spread is ``1.4826 MAD`` and its standard error ``sqrt(pi/2) spread / sqrt(n)``
    (normal-theory asymptotics; serially correlated windows make the true error larger).
    A wrong exponent ``n`` is not a pure scale and leaves a load-dependent residual that
    the constant cannot remove.

    Fix the constant once per reference epoch (new runner, recalibrated taps) and keep it:
    re-fitting it per week would absorb the very drift the service is meant to show.

    References
    ----------
    IEC 60041:1991, clause 15: index-test results are relative and are matched to an
    absolute reference by one factor (from memory). ASME PTC 18-2002, 4G. Rousseeuw &
    Croux (1993) for the MAD scale factor.
    """
    raw, ref = _f(eta_raw).ravel(), _f(eta_ref).ravel()
    if raw.shape != ref.shape:
        raise ValueError(f"index_constant: eta_raw has {raw.size} values but eta_ref has "
                         f"{ref.size}; pass pairs at the same operating points")
    usable = np.isfinite(raw) & np.isfinite(ref) & (raw > 0.0) & (ref > 0.0)
    n_used = int(usable.sum())
    if n_used < min_points:
        raise ValueError(
            f"index_constant: the baseline is too thin: {n_used} usable points (finite, "
            f"positive eta_raw and eta_ref) of {raw.size}, at least {min_points} needed; "
            "extend the baseline period or relax the steady-window tolerances")
    ratio = raw[usable] / ref[usable]
    value = float(np.median(ratio))
    spread = MAD_TO_SIGMA * float(np.median(np.abs(ratio - value)))
    return IndexConstant(value=value, spread=spread,
                         standard_error=MEDIAN_SE_FACTOR * spread / np.sqrt(n_used),
                         n_used=n_used, n_excluded=int(raw.size - n_used))


def deviation(eta_index: ArrayLike, eta_reference: ArrayLike) -> ArrayLike:
    """Efficiency deviation ``eta_i - eta_ref`` [-] (a fraction: 0.01 is one point).

    Parameters
    ----------
    eta_index : float or array [-] index efficiency on the reference scale
    eta_reference : float or array [-] reference efficiency at the same head and power

    References
    ----------
    IEC 60041:1991, clause 15 (comparison of index-test curves; from memory).
    """
    return _like(_f(eta_index) - _f(eta_reference), eta_index, eta_reference)


def relative_energy_loss(eta_index: ArrayLike, eta_reference: ArrayLike) -> ArrayLike:
    """Energy the same water would have given more at the reference efficiency, per unit made.

    Parameters
    ----------
    eta_index : float or array [-]
        Non-positive gives NaN.
    eta_reference : float or array [-]

    Returns
    -------
    float or array [-]
        ``eta_ref / eta_i - 1``; multiply by the power produced [W] for the lost power.
        Negative when the unit runs better than its reference.

    Notes
    -----
    At the same flow and head, ``P_ref = P (eta_ref / eta_i)``, hence the loss
    ``P (eta_ref/eta_i - 1)`` (docs: domain primer, section 4). It follows from the
    definition ``eta = P / (rho g Q H)``.
    """
    ei = _f(eta_index)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(ei > 0.0, _f(eta_reference) / ei - 1.0, np.nan)
    return _like(out, eta_index, eta_reference)
