"""Hill chart: a unit's reference efficiency over head and load, solved once, interpolated fast.

Evaluating the reference for millions of samples must not mean a root-find per sample. The
reference model (:mod:`analytics.runners`) is solved once per unit and reference version on
a grid of net heads and regulating-organ positions; the result is resampled, per head, onto
a common grid of *load* ``x = P / P_max(H)`` (and of flow ``Q / Q_max(H)``), which makes a
regular 2-D table in ``(H, x)``. :meth:`HillChart.efficiency_at_power` then interpolates
bilinearly with ``np.searchsorted``, fully vectorised.

Where a runner has several operating modes for the same power (a Pelton's number of active
jets) the chart holds the upper envelope over the modes: the operator runs the jet count
that gives the best efficiency, so that is the reference (common practice of jet-switching
schedules).

``P_max(H)`` moves with ``H^1.5`` for a fixed opening by the affinity laws (IEC 60193 unit
quantities: ``P11 = P / (D^2 H^1.5)``); it is interpolated as ``P_max / H^1.5`` so that the
interpolation between grid heads stays close to exact.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.runners.base import G_DEFAULT, RHO_DEFAULT, RunnerModel

#: Loads (fraction of the head's maximum power or flow) of the resampled chart.
DEFAULT_LOADS = np.linspace(0.04, 1.0, 49)
#: Regulating-organ positions the model is solved at (fraction).
DEFAULT_OPENINGS = np.linspace(0.02, 1.0, 50)


@dataclass(frozen=True)
class BestEfficiencyPoint:
    """The best-efficiency point at one head. Units: m, W, m3/s, fraction."""

    head: float
    power: float
    flow: float
    efficiency: float
    opening: float


@dataclass(frozen=True)
class HillChart:
    """Turbine efficiency on a regular ``(head, load)`` grid.

    Attributes
    ----------
    heads : (nh,) [m] net heads, ascending
    loads : (nl,) fraction of the head's maximum power (and flow), ascending
    max_power : (nh,) [W] largest shaft power at each head
    max_flow : (nh,) [m3/s] largest flow at each head
    eta_by_power : (nh, nl) efficiency at ``P = loads * max_power``; NaN where unreachable
    eta_by_flow : (nh, nl) efficiency at ``Q = loads * max_flow``
    opening_by_power : (nh, nl) regulating-organ position at that power
    flow_by_power : (nh, nl) [m3/s] flow at that power
    mode_by_power : (nh, nl) operating mode (Pelton: active jets; 0 otherwise)
    speed : [rad/s]; rho [kg/m3]; g [m/s2] the chart was solved for
    """

    heads: NDArray
    loads: NDArray
    max_power: NDArray
    max_flow: NDArray
    eta_by_power: NDArray
    eta_by_flow: NDArray
    opening_by_power: NDArray
    flow_by_power: NDArray
    mode_by_power: NDArray
    speed: float
    rho: float
    g: float
    meta: dict[str, Any] = field(default_factory=dict)

    # ------------------------------------------------------------------ evaluation
    def _row_position(self, head: NDArray) -> tuple[NDArray, NDArray, NDArray]:
        """Lower grid row, weight toward the next row, and validity for each head."""
        h = self.heads
        inside = (head >= h[0]) & (head <= h[-1])
        i = np.clip(np.searchsorted(h, head, side="right") - 1, 0, h.size - 2)
        t = (head - h[i]) / (h[i + 1] - h[i])
        return i, np.where(inside, t, np.nan), inside

    def _scale_at(self, values: NDArray, head: NDArray, exponent: float) -> NDArray:
        """``values(H)`` interpolated as ``values / H**exponent`` (affinity-law scaling)."""
        reduced = values / self.heads**exponent
        return np.interp(head, self.heads, reduced) * head**exponent

    def _corners(self, head: NDArray, load: NDArray
                 ) -> tuple[NDArray, NDArray, NDArray, NDArray, NDArray]:
        """Lower cell indices ``(i, j)``, weights ``(t, s)`` and validity of each point."""
        i, t, inside = self._row_position(head)
        x = self.loads
        ok = inside & (load >= x[0]) & (load <= x[-1])
        j = np.clip(np.searchsorted(x, load, side="right") - 1, 0, x.size - 2)
        s = (load - x[j]) / (x[j + 1] - x[j])
        return i, j, t, s, ok

    def _table_at(self, table: NDArray, head: NDArray, load: NDArray) -> NDArray:
        i, j, t, s, ok = self._corners(head, load)
        v00 = table[i, j]
        v01 = table[i, j + 1]
        v10 = table[i + 1, j]
        v11 = table[i + 1, j + 1]
        value = (1 - t) * ((1 - s) * v00 + s * v01) + t * ((1 - s) * v10 + s * v11)
        return np.where(ok, value, np.nan)

    def _load_of_power(self, p: NDArray, h: NDArray) -> NDArray:
        with np.errstate(invalid="ignore", divide="ignore"):
            return p / self._scale_at(self.max_power, h, 1.5)

    def efficiency_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Reference turbine efficiency at a shaft power [W] and net head [m].

        NaN outside the chart (head outside ``heads``, load outside ``loads``) or where an
        input is NaN: the caller counts such windows as having no reference.
        """
        p = np.asarray(power, dtype=float)
        h = np.asarray(head, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            load = p / self._scale_at(self.max_power, h, 1.5)
            return self._table_at(self.eta_by_power, h, load)

    def efficiency_at_flow(self, flow: ArrayLike, head: ArrayLike) -> NDArray:
        """Reference turbine efficiency at a flow [m3/s] and net head [m]; NaN outside."""
        q = np.asarray(flow, dtype=float)
        h = np.asarray(head, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            load = q / self._scale_at(self.max_flow, h, 0.5)
            return self._table_at(self.eta_by_flow, h, load)

    def opening_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Regulating-organ position (fraction) that gives ``power`` [W] at ``head`` [m].

        With operating modes (Pelton jets) it is the needle stroke of each of the
        :meth:`mode_at_power` active jets: the product ``jets * stroke`` (the total jet
        opening, which sets the flow) is interpolated and divided by that jet count, so
        that the stroke and the jet count belong together even where neighbouring grid
        points run different jet counts (interpolating the strokes of different jet counts
        would mix, e.g., 3 jets at 0.6 and 5 jets at 0.4 into a stroke no mode runs).
        """
        p = np.asarray(power, dtype=float)
        h = np.asarray(head, dtype=float)
        load = self._load_of_power(p, h)
        modes = np.asarray(self.mode_by_power)
        with np.errstate(invalid="ignore", divide="ignore"):
            if not np.any(modes > 0):
                return self._table_at(self.opening_by_power, h, load)
            total = self._table_at(self.opening_by_power * np.where(modes > 0, modes, 1),
                                   h, load)
            mode = self.mode_at_power(p, h)
            return np.where(mode > 0, total / np.where(mode > 0, mode, 1),
                            np.where(mode == 0, total, np.nan))

    def flow_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Flow [m3/s] of the reference at ``power`` [W] and ``head`` [m]."""
        p = np.asarray(power, dtype=float)
        h = np.asarray(head, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            load = p / self._scale_at(self.max_power, h, 1.5)
            return self._table_at(self.flow_by_power, h, load)

    def mode_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Operating mode (Pelton: active jets) at ``power`` [W] and ``head`` [m]; -1 outside.

        The largest mode among the grid points that carry weight in the interpolation:
        each of them reaches its own load with its mode, and more jets reach at least as
        much power, so that jet count can deliver the interpolated power (stroke <= 1).
        -1 wherever :meth:`efficiency_at_power` is NaN (head or load outside the chart,
        NaN input, no reachable operating point).
        """
        p = np.asarray(power, dtype=float)
        h = np.asarray(head, dtype=float)
        load = self._load_of_power(p, h)
        with np.errstate(invalid="ignore"):
            i, j, t, s, ok = self._corners(h, load)
            eta = self._table_at(self.eta_by_power, h, load)
            m = self.mode_by_power
            mode = np.where((1 - t) * (1 - s) > 0, m[i, j], 0)
            mode = np.maximum(mode, np.where((1 - t) * s > 0, m[i, j + 1], 0))
            mode = np.maximum(mode, np.where(t * (1 - s) > 0, m[i + 1, j], 0))
            mode = np.maximum(mode, np.where(t * s > 0, m[i + 1, j + 1], 0))
        return np.where(ok & np.isfinite(eta), mode, -1).astype(int)

    def best_efficiency_point(self, head: float) -> BestEfficiencyPoint:
        """BEP at ``head`` [m] on the chart's load grid (interpolated between grid heads)."""
        h = np.full(self.loads.shape, float(head))
        power = self.loads * float(self._scale_at(self.max_power, np.array([head]), 1.5)[0])
        eta = self.efficiency_at_power(power, h)
        if not np.isfinite(eta).any():
            raise ValueError(f"head {head:.3f} m is outside the hill chart "
                             f"({self.heads[0]:.3f} .. {self.heads[-1]:.3f} m)")
        k = int(np.nanargmax(eta))
        return BestEfficiencyPoint(
            head=float(head), power=float(power[k]),
            flow=float(self.flow_at_power(power[k:k + 1], h[k:k + 1])[0]),
            efficiency=float(eta[k]),
            opening=float(self.opening_at_power(power[k:k + 1], h[k:k + 1])[0]),
        )

    # ------------------------------------------------------------------ storage
    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (lists of floats; NaN as None)."""
        def clean(a: NDArray) -> list:
            return np.where(np.isfinite(a), a, np.nan).astype(object).tolist()

        out: dict[str, Any] = {}
        for name in ("heads", "loads", "max_power", "max_flow", "eta_by_power", "eta_by_flow",
                     "opening_by_power", "flow_by_power"):
            values = clean(np.asarray(getattr(self, name), dtype=float))
            out[name] = _nan_to_none(values)
        out["mode_by_power"] = np.asarray(self.mode_by_power, dtype=int).tolist()
        out.update(speed=self.speed, rho=self.rho, g=self.g, meta=self.meta)
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> HillChart:
        """Inverse of :meth:`to_dict`."""
        def arr(name: str) -> NDArray:
            return np.array(_none_to_nan(data[name]), dtype=float)

        return cls(
            heads=arr("heads"), loads=arr("loads"), max_power=arr("max_power"),
            max_flow=arr("max_flow"), eta_by_power=arr("eta_by_power"),
            eta_by_flow=arr("eta_by_flow"), opening_by_power=arr("opening_by_power"),
            flow_by_power=arr("flow_by_power"),
            mode_by_power=np.array(data["mode_by_power"], dtype=int),
            speed=float(data["speed"]), rho=float(data["rho"]), g=float(data["g"]),
            meta=dict(data.get("meta", {})),
        )


def _nan_to_none(values: Any) -> Any:
    if isinstance(values, list):
        return [_nan_to_none(v) for v in values]
    return None if values != values else float(values)  # NaN != NaN


def _none_to_nan(values: Any) -> Any:
    if isinstance(values, list):
        return [_none_to_nan(v) for v in values]
    return np.nan if values is None else values


def _resample_row(x: NDArray, columns: Sequence[NDArray], targets: NDArray) -> list[NDArray]:
    """Interpolate ``columns`` (functions of ``x``) at ``targets`` over the rising part of ``x``.

    A curve of power against opening rises to a maximum; beyond it (a model past its
    overload limit) the same power would map to two openings. Only the rising branch up to
    the maximum is kept, so each target load has one operating point.
    """
    good = np.isfinite(x)
    for c in columns:
        good &= np.isfinite(c)
    x = x[good]
    cols = [c[good] for c in columns]
    out = [np.full(targets.shape, np.nan) for _ in columns]
    if x.size < 2:
        return out
    top = int(np.argmax(x))
    x = x[: top + 1]
    cols = [c[: top + 1] for c in cols]
    rising = np.concatenate([[True], np.diff(x) > 0])
    rising &= x >= np.maximum.accumulate(x)
    x = x[rising]
    cols = [c[rising] for c in cols]
    if x.size < 2:
        return out
    inside = (targets >= x[0]) & (targets <= x[-1])
    for k, c in enumerate(cols):
        out[k] = np.where(inside, np.interp(targets, x, c), np.nan)
    return out


def build_hill_chart(model: RunnerModel, *, heads: ArrayLike, speed: float,
                     openings: ArrayLike = DEFAULT_OPENINGS, loads: ArrayLike = DEFAULT_LOADS,
                     modes: Sequence[int] | None = None, rho: float = RHO_DEFAULT,
                     g: float = G_DEFAULT) -> HillChart:
    """Solve ``model`` over ``heads`` x ``openings`` (x ``modes``) and resample by load.

    Parameters
    ----------
    model : a runner reference model (Kaplan: on-cam, blade angle from its cam)
    heads : [m] net heads, ascending, covering the unit's operating range with a margin
    speed : [rad/s] synchronous speed
    openings : regulating-organ positions to solve at (fraction, ascending)
    loads : resampling grid, fraction of each head's maximum power and flow
    modes : Pelton: the jet counts the unit may run (default: only all jets); else ignored
    rho, g : [kg/m3], [m/s2]

    Returns
    -------
    HillChart
    """
    h = np.asarray(heads, dtype=float)
    y = np.asarray(openings, dtype=float)
    x = np.asarray(loads, dtype=float)
    if h.ndim != 1 or h.size < 2 or np.any(np.diff(h) <= 0):
        raise ValueError("heads must be at least two ascending values")
    mode_list: list[int | None] = list(modes) if modes else [None]
    hh, yy = np.meshgrid(h, y, indexing="ij")
    solved = []
    for mode in mode_list:
        sol = model.solve(hh, speed, yy, jets=mode, rho=rho, g=g)
        solved.append((0 if mode is None else int(mode), sol))

    nh, nl = h.size, x.size
    max_power = np.array([np.nanmax([np.nanmax(np.where(s.efficiency[i] > 0,
                                                        s.shaft_power[i], np.nan),
                                               initial=0.0) for _, s in solved])
                          for i in range(nh)])
    max_flow = np.array([np.nanmax([np.nanmax(np.where(s.efficiency[i] > 0, s.flow[i], np.nan),
                                              initial=0.0) for _, s in solved])
                         for i in range(nh)])
    if np.any(max_power <= 0):
        bad = h[max_power <= 0]
        raise ValueError(f"the model delivers no power at head(s) {bad.tolist()} m")
    eta_p = np.full((nh, nl), np.nan)
    eta_q = np.full((nh, nl), np.nan)
    open_p = np.full((nh, nl), np.nan)
    flow_p = np.full((nh, nl), np.nan)
    mode_p = np.zeros((nh, nl), dtype=int)
    for i in range(nh):
        p_targets = x * max_power[i]
        q_targets = x * max_flow[i]
        for mode, s in solved:
            positive = s.efficiency[i] > 0
            power = np.where(positive, s.shaft_power[i], np.nan)
            eta, opening, flow = _resample_row(power, [s.efficiency[i], y, s.flow[i]],
                                               p_targets)
            better = np.isfinite(eta) & ~(eta <= eta_p[i])
            eta_p[i] = np.where(better, eta, eta_p[i])
            open_p[i] = np.where(better, opening, open_p[i])
            flow_p[i] = np.where(better, flow, flow_p[i])
            mode_p[i] = np.where(better, mode, mode_p[i])
            (eta_by_q,) = _resample_row(np.where(positive, s.flow[i], np.nan),
                                        [s.efficiency[i]], q_targets)
            eta_q[i] = np.fmax(eta_q[i], eta_by_q)
    return HillChart(
        heads=h, loads=x, max_power=max_power, max_flow=max_flow, eta_by_power=eta_p,
        eta_by_flow=eta_q, opening_by_power=open_p, flow_by_power=flow_p,
        mode_by_power=mode_p, speed=float(speed), rho=float(rho), g=float(g),
        meta={"runner_type": model.runner_type, "modes": [m for m, _ in solved]},
    )
