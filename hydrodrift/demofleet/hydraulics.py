"""The demo generator's hydraulics: from dispatched power and gross head to flow and signals.

Chain for one unit (vectorised over time), with the unit's as-built reference model
(:mod:`hydrodrift.demofleet.physics`) solved once into a hill chart::

    P_turbine = P_gen / eta_gen(P_gen)          (at most the chart's maximum at that head)
    H = H_gross - k_p Q^2                        (fixed-point iteration, to 1e-9 m)
    eta = eta_ref(P_turbine, H) + off-cam effect - degradation(t)
    Q = P_turbine / (rho g H eta)               (so P_gen = rho g Q H eta eta_gen exactly)
    dp_WK = (Q / k)^(1/n)                       (Winter-Kennedy, IEC 60041 index method)
    opening = the chart's opening at (P_turbine, H); Pelton jets: the chart's best count

``rho`` is IAPWS-IF97 water density at the water temperature (analytics.water) and ``g``
local gravity at the plant (IEC 60041 formula, analytics.site). Net head is gross head
minus the penstock loss only (no velocity-head terms); for a Pelton the low-pressure
reference is the jet-circle plane (IEC 60041 for Pelton turbines), so its gross head is
headwater minus that elevation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.index_test import generator_efficiency as curve_efficiency
from hydrodrift.demofleet.physics import DemoUnitPhysics
from ingest.plant_file import UnitSpec
from jobs.efficiency import generator_curve

#: Largest share of the chart's maximum power at a head the governor will load a unit to.
MAX_LOAD_OF_CHART = 0.995


@dataclass
class OperatingPoint:
    """Noise-free operating point of one unit over time (arrays of equal length).

    Offline samples (``online`` False) have zero power and flow, NaN efficiencies and
    the gross head as net head.
    """

    online: NDArray  # bool
    generator_power: NDArray  # [W]
    turbine_power: NDArray  # [W]
    generator_efficiency: NDArray  # fraction
    reference_efficiency: NDArray  # healthy turbine efficiency on cam, fraction
    degradation: NDArray  # efficiency points lost, as a fraction (0.015 = 1.5 points)
    turbine_efficiency: NDArray  # actual = reference + off-cam effect - degradation
    flow: NDArray  # [m3/s]
    gross_head: NDArray  # [m]
    net_head: NDArray  # [m]
    opening: NDArray  # fraction (0 offline)
    jets: NDArray  # active jets (Pelton), 0 otherwise
    rho: NDArray  # [kg/m3]
    g: float  # [m/s2]
    off_cam_effect: NDArray  # efficiency change from the blade-angle error (Kaplan), fraction


def generator_efficiency(unit: UnitSpec, power_w: ArrayLike) -> NDArray:
    """Generator efficiency of ``unit`` at an active power [W] (its plant-file curve)."""
    power = np.asarray(power_w, dtype=float)
    curve_p, curve_eta = generator_curve(unit)
    if curve_p is None:
        return np.full_like(power, float(curve_eta))
    return np.asarray(curve_efficiency(power, curve_p, curve_eta), dtype=float)


def operating_point(unit: UnitSpec, physics: DemoUnitPhysics, generator_power: ArrayLike,
                    gross_head: ArrayLike, degradation: ArrayLike, *, rho: ArrayLike,
                    g: float, blade_error: ArrayLike | None = None,
                    tolerance: float = 1e-9, max_iterations: int = 50) -> OperatingPoint:
    """Solve flow and net head of ``unit`` for a dispatched power at a gross head.

    Parameters
    ----------
    unit : the unit (penstock loss coefficient, generator curve)
    physics : its as-built model and hill chart
    generator_power : array [W] generator active power, 0 when stopped
    gross_head : array [m] headwater minus the low-pressure reference level
    degradation : array, efficiency lost (fraction), subtracted from the reference
    rho : array [kg/m3] water density; g : [m/s2] local gravity
    blade_error : Kaplan only, [rad] blade angle minus cam angle (None: on cam)
    tolerance : float [m] convergence of the net head iteration

    Returns
    -------
    OperatingPoint; ``P_gen = rho g Q H eta eta_gen`` holds to round-off by construction.
    """
    p_gen = np.asarray(generator_power, dtype=float)
    h_gross = np.broadcast_to(np.asarray(gross_head, dtype=float), p_gen.shape)
    loss = np.broadcast_to(np.asarray(degradation, dtype=float), p_gen.shape)
    density = np.broadcast_to(np.asarray(rho, dtype=float), p_gen.shape)
    online = p_gen > 0.0
    chart = physics.chart
    head = np.array(h_gross, dtype=float)
    effect = np.zeros(p_gen.shape)
    head, p_gen, p_turb, eta_gen, eta_ref, eta, flow = _solve_head(
        unit, chart, p_gen, online, h_gross, head, loss, effect, density, g, tolerance,
        max_iterations)
    opening = np.where(online, chart.opening_at_power(p_turb, head), 0.0)
    jets = np.where(online, chart.mode_at_power(p_turb, head), 0)
    if blade_error is not None and online.any():
        error = np.broadcast_to(np.asarray(blade_error, dtype=float), p_gen.shape)
        on_h, on_y = head[online], opening[online]
        cam = physics.model.geometry.cam_angle(on_y, on_h)  # type: ignore[attr-defined]
        on_cam = physics.model.solve(on_h, physics.speed, on_y, blade_angle=cam,
                                     rho=physics.rho, g=physics.g).efficiency
        off_cam = physics.model.solve(on_h, physics.speed, on_y, blade_angle=cam
                                      + error[online], rho=physics.rho, g=physics.g).efficiency
        effect[online] = np.nan_to_num(off_cam - on_cam)
        # the off-cam flow changes the penstock loss: solve the head again with the effect
        head, p_gen, p_turb, eta_gen, eta_ref, eta, flow = _solve_head(
            unit, chart, p_gen, online, h_gross, head, loss, effect, density, g, tolerance,
            max_iterations)
    return OperatingPoint(
        online=online, generator_power=p_gen, turbine_power=p_turb, generator_efficiency=eta_gen,
        reference_efficiency=np.where(online, eta_ref, np.nan), degradation=np.array(loss),
        turbine_efficiency=np.where(online, eta, np.nan), flow=flow,
        gross_head=np.array(h_gross), net_head=head, opening=opening, jets=jets,
        rho=np.array(density), g=g, off_cam_effect=effect,
    )


def _solve_head(unit: UnitSpec, chart, p_gen: NDArray, online: NDArray, h_gross: NDArray,
                head: NDArray, loss: NDArray, effect: NDArray, density: NDArray, g: float,
                tolerance: float, max_iterations: int) -> tuple[NDArray, ...]:
    """Fixed point ``H = H_gross - k_p Q^2`` with ``Q = P / (rho g H eta(P, H))``."""
    k_p = unit.penstock_loss_coefficient
    for _ in range(max_iterations):
        eta_gen = np.where(online, generator_efficiency(unit, p_gen), np.nan)
        p_turb = np.where(online, p_gen / np.where(online, eta_gen, 1.0), 0.0)
        limit = MAX_LOAD_OF_CHART * chart.max_power_at(head)
        p_turb = np.minimum(p_turb, limit)
        p_gen = np.where(online, p_turb * eta_gen, 0.0)
        eta_ref = chart.efficiency_at_power(p_turb, head)
        eta = eta_ref + effect - loss
        flow = np.where(online, p_turb / (density * g * head * eta), 0.0)
        new_head = h_gross - k_p * flow**2
        if np.max(np.abs(new_head - head), initial=0.0) < tolerance:
            break
        head = new_head
    else:  # pragma: no cover - the iteration contracts by ~2 k_p Q^2 / H << 1
        raise RuntimeError(f"net head of unit {unit.code} did not converge")
    if np.isnan(eta_ref[online]).any():
        raise RuntimeError(f"unit {unit.code}: operating points outside its hill chart")
    return head, p_gen, p_turb, eta_gen, eta_ref, eta, flow


def wk_differential_pressure(unit: UnitSpec, flow: ArrayLike) -> NDArray:
    """Winter-Kennedy differential pressure from ``Q = k dp^n``, inverted [Pa].

    Parameters
    ----------
    unit : the unit, with ``winter_kennedy_coefficient`` k [m3/s per Pa^n] and exponent n
    flow : array [m3/s]

    References
    ----------
    IEC 60041:1991, index test (Winter-Kennedy method).
    """
    if unit.winter_kennedy_coefficient is None:
        raise ValueError(f"unit {unit.code} has no winter_kennedy_coefficient")
    q = np.asarray(flow, dtype=float)
    return (q / unit.winter_kennedy_coefficient) ** (1.0 / unit.winter_kennedy_exponent)
