"""The demo generator's efficiency model: a smooth hill built from a unit's reference points.

This is the ONE place where the generator decides how efficient a turbine is
(:func:`turbine_efficiency`) and how efficient its generator is
(:func:`generator_efficiency`). A later issue replaces the hill with the analytics
reference models; nothing else in the generator needs to change then.

The hill (invented for the demo, a common textbook caricature of a measured curve):

.. math::

    x = P / (P_{bep} (H / H_{bep})^{1.5}),\\qquad
    \\eta = \\eta_{max} - a (x - 1)^2 - b (H / H_{bep} - 1)^2,

with ``a = a_part`` below the best-efficiency point (BEP) and ``a = a_over`` above it: a
parabola in load around the BEP, whose power moves with ``H^1.5`` as the affinity laws
move a fixed opening's power, and a gentle head penalty. ``P`` is turbine shaft power.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ingest.plant_file import ReferencePoint, UnitSpec

#: The hill never goes below this efficiency (very low load is never dispatched).
ETA_FLOOR = 0.30


@dataclass(frozen=True)
class HillModel:
    """Coefficients of the hill (see the module docstring).

    Attributes
    ----------
    bep_power : float [W] turbine power at the BEP at ``bep_head``
    bep_head : float [m]
    eta_max : float, efficiency at the BEP
    a_part, a_over, b_head : float, curvature coefficients
    rms_residual : float, RMS of the fit residuals over the reference points
    """

    bep_power: float
    bep_head: float
    eta_max: float
    a_part: float
    a_over: float
    b_head: float
    rms_residual: float = 0.0


def hill_efficiency(turbine_power: ArrayLike, head: ArrayLike, model: HillModel) -> NDArray:
    """Turbine efficiency of the hill at a turbine power and net head.

    Parameters
    ----------
    turbine_power : float or array [W] turbine shaft power
    head : float or array [m] net head
    model : the hill's coefficients

    Returns
    -------
    array, efficiency as a fraction; NaN where an input is NaN.
    """
    power = np.asarray(turbine_power, dtype=float)
    head_ratio = np.asarray(head, dtype=float) / model.bep_head
    with np.errstate(invalid="ignore", divide="ignore"):
        load = power / (model.bep_power * head_ratio**1.5)
    dx = load - 1.0
    a = np.where(dx < 0.0, model.a_part, model.a_over)
    eta = model.eta_max - a * dx**2 - model.b_head * (head_ratio - 1.0) ** 2
    return np.where(np.isnan(eta), np.nan, np.maximum(eta, ETA_FLOOR))


def fit_hill(points: tuple[ReferencePoint, ...] | list[ReferencePoint]) -> HillModel:
    """Fit the hill to reference points that carry power, head and efficiency.

    The point of highest efficiency is taken as the BEP; ``a_part``, ``a_over`` and
    ``b_head`` follow by linear least squares on the others.

    Raises
    ------
    ValueError if fewer than four points give a power.
    """
    usable = [p for p in points if p.power is not None]
    if len(usable) < 4:
        raise ValueError(f"the hill needs at least 4 reference points with power, "
                         f"got {len(usable)}")
    bep = max(usable, key=lambda p: p.efficiency)
    power = np.array([p.power for p in usable], dtype=float)
    head = np.array([p.head for p in usable], dtype=float)
    eta = np.array([p.efficiency for p in usable], dtype=float)
    head_ratio = head / bep.head
    dx = power / (bep.power * head_ratio**1.5) - 1.0
    design = np.column_stack([
        np.where(dx < 0, dx**2, 0.0),
        np.where(dx > 0, dx**2, 0.0),
        (head_ratio - 1.0) ** 2,
    ])
    deficit = bep.efficiency - eta
    coef, *_ = np.linalg.lstsq(design, deficit, rcond=None)
    residual = deficit - design @ coef
    return HillModel(
        bep_power=float(bep.power), bep_head=float(bep.head), eta_max=float(bep.efficiency),
        a_part=float(coef[0]), a_over=float(coef[1]), b_head=float(coef[2]),
        rms_residual=float(np.sqrt(np.mean(residual**2))),
    )


def turbine_efficiency(unit: UnitSpec, power_w: ArrayLike, head_m: ArrayLike) -> NDArray:
    """The healthy (reference) turbine efficiency of ``unit`` at a power and net head.

    Parameters
    ----------
    unit : the unit, with at least four reference points carrying power
    power_w : float or array [W] turbine shaft power
    head_m : float or array [m] net head

    Returns
    -------
    array, efficiency as a fraction.
    """
    return hill_efficiency(power_w, head_m, fit_hill(unit.reference_points))


def generator_efficiency(unit: UnitSpec, power_w: ArrayLike) -> NDArray:
    """Generator efficiency at an active power: the unit's curve, linearly interpolated.

    Parameters
    ----------
    unit : the unit (constant efficiency, or a curve of points)
    power_w : float or array [W] generator active power

    Returns
    -------
    array, efficiency as a fraction; held constant beyond the curve's ends.
    """
    power = np.asarray(power_w, dtype=float)
    curve = unit.generator_efficiency
    if isinstance(curve, float):
        return np.full_like(power, curve)
    xs = np.array([p.power for p in curve])
    ys = np.array([p.efficiency for p in curve])
    order = np.argsort(xs)
    return np.interp(power, xs[order], ys[order])
