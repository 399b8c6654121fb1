"""Hill chart: a unit's reference efficiency over head and load, solved once, interpolated fast.

Evaluating the reference for millions of samples must not mean a root-find per sample. The
reference model (:mod:`analytics.runners`) is solved once per unit and reference version on
a grid of net heads and regulating-organ positions. For each operating mode the result is
resampled, per head, onto a grid of *load* ``x = P / P_max,m(H)`` (and of flow
``Q / Q_max,m(H)``), relative to that mode's own maximum, which makes one regular 2-D table
in ``(H, x)`` per mode. Lookups interpolate bilinearly (Press et al., *Numerical Recipes*,
3rd ed., 2007, sec. 3.6, bilinear interpolation on a rectangular grid) with
``np.searchsorted``, vectorised over samples and modes at once.

Operating modes are a Pelton's numbers of active jets (Francis and Kaplan runners have one
mode, numbered 0). For the same power several jet counts may do; the operator runs the one
with the best efficiency (common practice of jet-switching schedules), so each lookup takes,
per sample, the mode with the highest interpolated efficiency among the modes that can
deliver the power, and returns that mode's opening and flow. Why one table per mode: with
the part-stroke nozzle loss (:mod:`analytics.runners.pelton`) the best efficiency drops
suddenly at every jet switch (``k`` jets at full stroke, then ``k + 1`` at a stroke near
``k / (k + 1)``); one table of the maximum over modes would interpolate across that jump,
while each mode's own curve is smooth over its own range.

``P_max,m(H)`` moves with ``H^1.5`` for a fixed opening by the affinity laws (IEC 60193 unit
quantities: ``P11 = P / (D^2 H^1.5)``); it is interpolated as ``P_max,m / H^1.5`` (and
``Q_max,m`` as ``Q_max,m / H^0.5``) so that the interpolation between grid heads stays close
to exact. It is still an interpolation: between grid heads a power within its error below a
mode's full power (a few 1e-5 of it for a Pelton on a 10 m head step) reads as beyond that
mode, and the next mode is used there; the band shrinks with the head step squared.

The chart is a reference for efficiency-drift monitoring. The jet count it reports is the
model's best, not a switching schedule: the service advises; the unit's own schedule,
operating limits, local codes and licensed practice prevail.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.runners.base import G_DEFAULT, RHO_DEFAULT, RunnerModel

#: Loads (fraction of the mode's maximum power or flow at the head) of the resampled chart.
DEFAULT_LOADS = np.linspace(0.04, 1.0, 49)
#: Regulating-organ positions the model is solved at (fraction).
DEFAULT_OPENINGS = np.linspace(0.02, 1.0, 50)

#: Samples per block in a lookup (see :meth:`HillChart._lookup`).
_BLOCK = 1 << 14
# Per-mode arrays stored by to_dict, in this order.
_STORED = ("max_power_per_mode", "max_flow_per_mode", "eta_by_power_per_mode",
           "eta_by_flow_per_mode", "opening_by_power_per_mode", "flow_by_power_per_mode")


#: Layout of :meth:`HillChart.to_dict`; bumped whenever the stored form changes.
CHART_LAYOUT = 2


@dataclass(frozen=True)
class BestEfficiencyPoint:
    """The best-efficiency point at one head. Units: m, W, m3/s, fraction."""

    head: float
    power: float
    flow: float
    efficiency: float
    opening: float


class _Cells(NamedTuple):
    """Where each sample falls in each mode's table (modes on axis 0, samples on axis 1)."""

    i: NDArray  # (n,) lower grid row (head)
    t: NDArray  # (n,) weight toward row i + 1; NaN outside the head range
    j: NDArray  # (nm, n) lower grid column (load)
    s: NDArray  # (nm, n) weight toward column j + 1
    ok: NDArray  # (nm, n) head and load inside the chart


@dataclass(frozen=True)
class HillChart:
    """Turbine efficiency per operating mode on regular ``(head, load)`` grids.

    Attributes
    ----------
    heads : (nh,) [m] net heads, ascending
    loads : (nl,) fraction of each mode's maximum power (and flow) at the head, ascending
    modes : (nm,) int, operating modes (Pelton: active jets), ascending; ``[0]`` for a
        single-mode runner
    max_power_per_mode : (nm, nh) [W] largest shaft power of each mode at each head
        (0 where the mode delivers none)
    max_flow_per_mode : (nm, nh) [m3/s] largest flow of each mode at each head
    eta_by_power_per_mode : (nm, nh, nl) efficiency of mode m at
        ``P = loads * max_power_per_mode[m]``; NaN where unreachable
    eta_by_flow_per_mode : (nm, nh, nl) efficiency at ``Q = loads * max_flow_per_mode[m]``
    opening_by_power_per_mode : (nm, nh, nl) regulating-organ position at that power (a
        Pelton's needle stroke of each of the mode's active jets)
    flow_by_power_per_mode : (nm, nh, nl) [m3/s] flow at that power
    speed : [rad/s]; rho [kg/m3]; g [m/s2] the chart was solved for
    meta : runner type and modes, for the record

    The properties ``max_power`` and ``max_flow`` are the maxima over modes per head;
    ``eta_by_power``, ``eta_by_flow``, ``opening_by_power``, ``flow_by_power`` and
    ``mode_by_power`` are the best-mode envelope sampled on the common grid
    ``loads * max_power`` (``loads * max_flow``), for inspection and comparison.
    """

    heads: NDArray
    loads: NDArray
    modes: NDArray
    max_power_per_mode: NDArray
    max_flow_per_mode: NDArray
    eta_by_power_per_mode: NDArray
    eta_by_flow_per_mode: NDArray
    opening_by_power_per_mode: NDArray
    flow_by_power_per_mode: NDArray
    speed: float
    rho: float
    g: float
    meta: dict[str, Any] = field(default_factory=dict)

    # ------------------------------------------------------------------ maxima, envelope
    @property
    def max_power(self) -> NDArray:
        """(nh,) [W] largest shaft power at each head, over all modes."""
        return np.max(self.max_power_per_mode, axis=0)

    @property
    def max_flow(self) -> NDArray:
        """(nh,) [m3/s] largest flow at each head, over all modes."""
        return np.max(self.max_flow_per_mode, axis=0)

    @property
    def eta_by_power(self) -> NDArray:
        """(nh, nl) best-mode efficiency at ``P = loads * max_power``; NaN where unreachable."""
        return self._envelope_by_power()[0]

    @property
    def opening_by_power(self) -> NDArray:
        """(nh, nl) opening of the best mode at ``P = loads * max_power``."""
        return self._envelope_by_power()[1]

    @property
    def flow_by_power(self) -> NDArray:
        """(nh, nl) [m3/s] flow of the best mode at ``P = loads * max_power``."""
        return self._envelope_by_power()[2]

    @property
    def mode_by_power(self) -> NDArray:
        """(nh, nl) int, best mode at ``P = loads * max_power``; 0 where no mode reaches."""
        return self._envelope_by_power()[3]

    @property
    def eta_by_flow(self) -> NDArray:
        """(nh, nl) best-mode efficiency at ``Q = loads * max_flow``; NaN where unreachable."""
        if self.modes.size == 1:
            return self.eta_by_flow_per_mode[0]
        eta = self._rows_at(self.eta_by_flow_per_mode, self.max_flow_per_mode)
        return np.fmax.reduce(eta, axis=0)

    def _rows_at(self, table: NDArray, maxima: NDArray) -> NDArray:
        """Each mode's table at the grid heads and at ``loads * max over modes``."""
        top = np.max(maxima, axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = top / maxima  # exactly 1 for the mode that has the maximum
        load = self.loads[None, None, :] * ratio[:, :, None]
        x = self.loads
        j = np.clip(np.searchsorted(x, load, side="right") - 1, 0, x.size - 2)
        s = (load - x[j]) / (x[j + 1] - x[j])
        v0 = np.take_along_axis(table, j, axis=-1)
        v1 = np.take_along_axis(table, j + 1, axis=-1)
        inside = (load >= x[0]) & (load <= x[-1])
        return np.where(inside, (1 - s) * v0 + s * v1, np.nan)

    def _envelope_by_power(self) -> tuple[NDArray, NDArray, NDArray, NDArray]:
        tables = (self.eta_by_power_per_mode, self.opening_by_power_per_mode,
                  self.flow_by_power_per_mode)
        if self.modes.size == 1:
            eta, opening, flow = (t[0] for t in tables)
            return eta, opening, flow, np.where(np.isfinite(eta), int(self.modes[0]), 0)
        eta, opening, flow = (self._rows_at(t, self.max_power_per_mode) for t in tables)
        best, found = _best(eta)
        pick = [np.take_along_axis(a, best[None], axis=0)[0] for a in (eta, opening, flow)]
        return (*pick, np.where(found, self.modes[best], 0))

    # ------------------------------------------------------------------ evaluation
    def _cells(self, value: NDArray, head: NDArray, scaling: tuple[NDArray, NDArray],
               exponent: float) -> _Cells:
        """Cells of ``value`` (power or flow) at ``head``, as a load of each mode's maximum.

        ``scaling`` is ``(maxima / H**exponent, its slopes between grid heads)``: the mode
        maxima are interpolated in that reduced form (affinity-law scaling), with the same
        arithmetic as ``np.interp`` for each mode.
        """
        h = self.heads
        reduced, slope = scaling
        i = np.clip(np.searchsorted(h, head, side="right") - 1, 0, h.size - 2)
        inside = (head >= h[0]) & (head <= h[-1])
        dh = head - h[i]
        t = np.where(inside, dh / np.diff(h)[i], np.nan)
        at = slope[:, i] * dh + reduced[:, i]
        top = np.flatnonzero(head == h[-1])  # np.interp returns the last value exactly there
        at[:, top] = reduced[:, -1:]
        load = value / (at * head**exponent)
        x = self.loads
        ok = inside & (load >= x[0]) & (load <= x[-1])
        j = np.clip(np.searchsorted(x, load, side="right") - 1, 0, x.size - 2)
        s = (load - x[j]) / np.diff(x)[j]
        return _Cells(i, t, j, s, ok)

    def _bilinear(self, table: NDArray, c: _Cells, mode: NDArray | None = None) -> NDArray:
        """``table`` (nm, nh, nl) at the cells: every mode, or one index ``mode`` per sample."""
        nh, nl = table.shape[1:]
        flat = table.reshape(-1)
        if mode is None:
            k = np.arange(table.shape[0])[:, None]
            j, s, ok = c.j, c.s, c.ok
        else:
            n = np.arange(c.i.size)
            k, j, s, ok = mode, c.j[mode, n], c.s[mode, n], c.ok[mode, n]
        base = (k * nh + c.i) * nl + j
        t = c.t
        u = 1 - s
        value = ((1 - t) * (u * flat[base] + s * flat[base + 1])
                 + t * (u * flat[base + nl] + s * flat[base + nl + 1]))
        return np.where(ok, value, np.nan)

    def _scaling(self, maxima: NDArray, exponent: float) -> tuple[NDArray, NDArray]:
        reduced = maxima / self.heads**exponent
        return reduced, np.diff(reduced, axis=1) / np.diff(self.heads)

    def _lookup(self, value: ArrayLike, head: ArrayLike, what: str) -> NDArray:
        """One lookup of ``what`` at ``value`` (power [W]; flow [m3/s] for ``eta_q``).

        Vectorised over the modes and over blocks of samples: the Python loop runs once per
        block of ``_BLOCK`` samples, which keeps the (modes x block) temporaries small.
        """
        v, h = np.broadcast_arrays(np.asarray(value, dtype=float), np.asarray(head, dtype=float))
        v, h, shape = v.reshape(-1), h.reshape(-1), v.shape
        by_flow = what == "eta_q"
        scaling = (self._scaling(self.max_flow_per_mode, 0.5) if by_flow
                   else self._scaling(self.max_power_per_mode, 1.5))
        eta_table = self.eta_by_flow_per_mode if by_flow else self.eta_by_power_per_mode
        other = {"opening": self.opening_by_power_per_mode,
                 "flow": self.flow_by_power_per_mode}.get(what)
        out = np.empty(v.size, dtype=int if what == "mode" else float)
        with np.errstate(invalid="ignore", divide="ignore"):
            for a in range(0, v.size, _BLOCK):
                c = self._cells(v[a:a + _BLOCK], h[a:a + _BLOCK], scaling,
                                0.5 if by_flow else 1.5)
                eta = self._bilinear(eta_table, c)
                if by_flow:
                    out[a:a + _BLOCK] = np.fmax.reduce(eta, axis=0)
                    continue
                best, found = _best(eta)
                if what == "eta":
                    out[a:a + _BLOCK] = eta[best, np.arange(best.size)]
                elif what == "mode":
                    out[a:a + _BLOCK] = np.where(found, self.modes[best], -1)
                else:
                    out[a:a + _BLOCK] = self._bilinear(other, c, best)
        return out.reshape(shape)

    def efficiency_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Reference turbine efficiency at a shaft power [W] and net head [m].

        The best mode's: the highest efficiency among the modes that can deliver ``power``.
        NaN outside the chart (head outside ``heads``, no mode with the load inside
        ``loads``) or where an input is NaN: the caller counts such windows as having no
        reference.
        """
        return self._lookup(power, head, "eta")

    def efficiency_at_flow(self, flow: ArrayLike, head: ArrayLike) -> NDArray:
        """Reference turbine efficiency at a flow [m3/s] and net head [m]; NaN outside.

        The best over the modes that can pass ``flow``.
        """
        return self._lookup(flow, head, "eta_q")

    def opening_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Regulating-organ position (fraction) that gives ``power`` [W] at ``head`` [m].

        With operating modes (Pelton jets) it is the needle stroke of each of the
        :meth:`mode_at_power` active jets, interpolated in that jet count's own table, so
        that the stroke and the jet count belong together.
        """
        return self._lookup(power, head, "opening")

    def flow_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Flow [m3/s] of the reference (the best mode) at ``power`` [W] and ``head`` [m]."""
        return self._lookup(power, head, "flow")

    def mode_at_power(self, power: ArrayLike, head: ArrayLike) -> NDArray:
        """Operating mode (Pelton: active jets) at ``power`` [W] and ``head`` [m]; -1 outside.

        The mode with the highest efficiency among those that can deliver the power (the
        fewest on a tie); 0 for a single-mode runner. -1 wherever
        :meth:`efficiency_at_power` is NaN (head or load outside the chart, NaN input, no
        reachable operating point). A reference, not a switching schedule: the unit's own
        schedule and limits prevail.
        """
        return self._lookup(power, head, "mode")

    def max_power_at(self, head: ArrayLike) -> NDArray:
        """Largest shaft power [W] at ``head`` [m], interpolated as ``P_max / H^1.5``."""
        h = np.asarray(head, dtype=float)
        return np.interp(h, self.heads, self.max_power / self.heads**1.5) * h**1.5

    def best_efficiency_point(self, head: float) -> BestEfficiencyPoint:
        """BEP at ``head`` [m] on the chart's load grid (interpolated between grid heads)."""
        h = np.full(self.loads.shape, float(head))
        at = np.array([float(head)])
        top = self.max_power_at(at)
        power = self.loads * float(top[0])
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
        out: dict[str, Any] = {}
        for name in ("heads", "loads", *_STORED):
            values = np.asarray(getattr(self, name), dtype=float).astype(object).tolist()
            out[name] = _nan_to_none(values)
        out["modes"] = np.asarray(self.modes, dtype=int).tolist()
        out.update(speed=self.speed, rho=self.rho, g=self.g, meta=self.meta,
                   layout=CHART_LAYOUT)
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> HillChart:
        """Inverse of :meth:`to_dict`.

        Raises
        ------
        ValueError when ``data`` was written in another layout (by another code version).
        """
        if data.get("layout") != CHART_LAYOUT:
            raise ValueError(f"stored hill chart has layout {data.get('layout')!r}, this code "
                             f"reads layout {CHART_LAYOUT}: rebuild the reference (a new "
                             "reference version) with this code version")
        arrays = {name: np.array(_none_to_nan(data[name]), dtype=float)
                  for name in ("heads", "loads", *_STORED)}
        return cls(**arrays, modes=np.array(data["modes"], dtype=int),
                   speed=float(data["speed"]), rho=float(data["rho"]), g=float(data["g"]),
                   meta=dict(data.get("meta", {})))


def _best(eta: NDArray) -> tuple[NDArray, NDArray]:
    """Index of the highest finite value along axis 0 (the first on a tie) and whether any."""
    finite = np.isfinite(eta)
    if eta.shape[0] == 1:
        return np.zeros(eta.shape[1:], dtype=np.intp), finite[0]
    return np.argmax(np.where(finite, eta, -np.inf), axis=0), finite.any(axis=0)


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
    loads : resampling grid, fraction of each mode's maximum power and flow at each head
    modes : Pelton: the jet counts the unit may run (default: only all jets); else ignored
    rho, g : [kg/m3], [m/s2]

    Returns
    -------
    HillChart
        One table per mode (sorted ascending); mode 0 when ``modes`` is None.
    """
    h = np.asarray(heads, dtype=float)
    y = np.asarray(openings, dtype=float)
    x = np.asarray(loads, dtype=float)
    if h.ndim != 1 or h.size < 2 or np.any(np.diff(h) <= 0):
        raise ValueError("heads must be at least two ascending values")
    mode_list: list[int | None] = sorted({int(m) for m in modes}) if modes else [None]
    hh, yy = np.meshgrid(h, y, indexing="ij")
    nm, nh, nl = len(mode_list), h.size, x.size
    max_p = np.zeros((nm, nh))
    max_q = np.zeros((nm, nh))
    tables = {name: np.full((nm, nh, nl), np.nan) for name in _STORED[2:]}
    for k, mode in enumerate(mode_list):
        s = model.solve(hh, speed, yy, jets=mode, rho=rho, g=g)
        positive = s.efficiency > 0
        power = np.where(positive, s.shaft_power, np.nan)
        flow = np.where(positive, s.flow, np.nan)
        max_p[k] = np.nanmax(power, axis=1, initial=0.0)
        max_q[k] = np.nanmax(flow, axis=1, initial=0.0)
        for i in range(nh):
            eta, opening, q = _resample_row(power[i], [s.efficiency[i], y, s.flow[i]],
                                            x * max_p[k, i])
            tables["eta_by_power_per_mode"][k, i] = eta
            tables["opening_by_power_per_mode"][k, i] = opening
            tables["flow_by_power_per_mode"][k, i] = q
            (tables["eta_by_flow_per_mode"][k, i],) = _resample_row(
                flow[i], [s.efficiency[i]], x * max_q[k, i])
    if np.any(max_p.max(axis=0) <= 0):
        bad = h[max_p.max(axis=0) <= 0]
        raise ValueError(f"the model delivers no power at head(s) {bad.tolist()} m")
    numbers = [0 if m is None else m for m in mode_list]
    return HillChart(
        heads=h, loads=x, modes=np.array(numbers, dtype=int), max_power_per_mode=max_p,
        max_flow_per_mode=max_q, **tables, speed=float(speed), rho=float(rho), g=float(g),
        meta={"runner_type": model.runner_type, "modes": numbers},
    )
