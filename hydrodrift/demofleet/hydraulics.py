"""The demo generator's hydraulics: from dispatched power and gross head to flow and signals.

Chain for one unit (vectorised over time)::

    P_turbine = P_gen / eta_gen(P_gen)
    H = H_gross - k_p Q^2                      (fixed-point iteration, to 1e-9 m)
    eta = eta_ref(P_turbine, H) - degradation(t)
    Q = P_turbine / (rho g H eta)              (so P_gen = rho g Q H eta eta_gen exactly)
    dp_WK = (Q / k)^(1/n)                      (Winter-Kennedy, IEC 60041 index method)
    opening = (Q / Q_full(H))^(1/gamma),  Q_full(H) = Q_full,rated sqrt(H / H_rated)

Net head here is gross head minus the penstock loss only (no velocity-head terms); for a
Pelton the low-pressure reference is the jet-circle plane (IEC 60041 for Pelton turbines),
so its gross head is headwater minus that elevation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import RegularGridInterpolator

from hydrodrift.demofleet.efficiency import generator_efficiency, turbine_efficiency
from ingest.plant_file import KaplanGeometry, UnitSpec

#: Water density [kg/m3] and gravity [m/s2] used by the generator, in ONE place.
#: The analytics water module (density from temperature and pressure, gravity from latitude
#: and altitude per IEC 60041) does not exist yet; when it does it replaces these two.
RHO_WATER = 1000.0
GRAVITY = 9.81


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
    reference_efficiency: NDArray  # healthy turbine efficiency, fraction
    degradation: NDArray  # efficiency points lost, as a fraction (0.015 = 1.5 points)
    turbine_efficiency: NDArray  # actual = reference - degradation
    flow: NDArray  # [m3/s]
    gross_head: NDArray  # [m]
    net_head: NDArray  # [m]


def operating_point(unit: UnitSpec, generator_power: ArrayLike, gross_head: ArrayLike,
                    degradation: ArrayLike, *, tolerance: float = 1e-9,
                    max_iterations: int = 50) -> OperatingPoint:
    """Solve flow and net head of ``unit`` for a dispatched power at a gross head.

    Parameters
    ----------
    unit : the unit (penstock loss coefficient, efficiency curves)
    generator_power : array [W] generator active power, 0 when stopped
    gross_head : array [m] headwater minus the low-pressure reference level
    degradation : array, efficiency lost (fraction), subtracted from the reference hill
    tolerance : float [m] convergence of the net head iteration

    Returns
    -------
    OperatingPoint; ``P_gen = rho g Q H eta eta_gen`` holds to round-off by construction.
    """
    p_gen = np.asarray(generator_power, dtype=float)
    h_gross = np.broadcast_to(np.asarray(gross_head, dtype=float), p_gen.shape)
    loss = np.broadcast_to(np.asarray(degradation, dtype=float), p_gen.shape)
    online = p_gen > 0.0
    eta_gen = np.where(online, generator_efficiency(unit, p_gen), np.nan)
    p_turb = np.where(online, p_gen / np.where(online, eta_gen, 1.0), 0.0)
    k_p = unit.penstock_loss_coefficient
    head = np.array(h_gross, dtype=float)
    for _ in range(max_iterations):
        eta_ref = turbine_efficiency(unit, p_turb, head)
        eta = eta_ref - loss
        flow = np.where(online, p_turb / (RHO_WATER * GRAVITY * head * eta), 0.0)
        new_head = h_gross - k_p * flow**2
        if np.max(np.abs(new_head - head), initial=0.0) < tolerance:
            break
        head = new_head
    else:  # pragma: no cover - the iteration contracts by ~2 k_p Q^2 / H << 1
        raise RuntimeError(f"net head of unit {unit.code} did not converge")
    return OperatingPoint(
        online=online, generator_power=p_gen, turbine_power=p_turb, generator_efficiency=eta_gen,
        reference_efficiency=np.where(online, eta_ref, np.nan), degradation=np.array(loss),
        turbine_efficiency=np.where(online, eta, np.nan), flow=flow,
        gross_head=np.array(h_gross), net_head=head,
    )


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


def gate_opening(flow: ArrayLike, net_head: ArrayLike, *, full_open_flow: float,
                 rated_head: float, exponent: float) -> NDArray:
    """Guide-vane opening (or needle stroke) as a fraction 0..1, monotone in flow.

    Parameters
    ----------
    flow : array [m3/s]
    net_head : array [m]
    full_open_flow : float [m3/s] flow at full opening at ``rated_head``
    rated_head : float [m]
    exponent : float, gamma in ``Q / Q_full(H) = opening^gamma`` (invented law)
    """
    q_full = full_open_flow * np.sqrt(np.asarray(net_head, dtype=float) / rated_head)
    ratio = np.clip(np.asarray(flow, dtype=float) / q_full, 0.0, 1.0)
    return ratio ** (1.0 / exponent)


def cam_blade_angle(geometry: KaplanGeometry, opening: ArrayLike, net_head: ArrayLike) -> NDArray:
    """Blade angle from the installed cam table, bilinear, clamped to the table [rad].

    Parameters
    ----------
    geometry : Kaplan geometry whose ``cam`` holds a full grid of
        (opening fraction, net head [m], blade angle [deg]) triples
    opening : array, fraction 0..1
    net_head : array [m]
    """
    table = np.array(geometry.cam, dtype=float)
    openings = np.unique(table[:, 0])
    heads = np.unique(table[:, 1])
    grid = np.full((openings.size, heads.size), np.nan)
    grid[np.searchsorted(openings, table[:, 0]), np.searchsorted(heads, table[:, 1])] = table[:, 2]
    if np.isnan(grid).any():
        raise ValueError("the cam table is not a full grid of openings and heads")
    interpolate = RegularGridInterpolator((openings, heads), grid)
    y = np.clip(np.asarray(opening, dtype=float), openings[0], openings[-1])
    h = np.clip(np.asarray(net_head, dtype=float), heads[0], heads[-1])
    return np.deg2rad(interpolate(np.column_stack([y.ravel(), h.ravel()])).reshape(y.shape))
