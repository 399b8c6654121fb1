"""The contract every runner reference model keeps: inputs, the solution and its energy balance.

A reference model is a mean-line (velocity-triangle) model of one runner. For a net head
``H``, a rotational speed ``omega`` and a regulating-organ position (guide-vane opening for a
Francis, opening and blade angle for a Kaplan, needle stroke and jet count for a Pelton) it
returns the flow, the Euler runner work, every named loss, the shaft power and the
efficiency, vectorised over numpy arrays (broadcast together).

Energy balance (power, W), which every model closes to round-off::

    P_h = rho * Q * E = P_shaft + sum(losses.values())

with ``E = g * H`` the specific hydraulic energy (IEC 60041), ``Q`` the flow through the
turbine's high-pressure section (what a flow meter or the Winter-Kennedy taps see), and
``losses`` the named loss powers: hydraulic losses of the runner flow (``rho*Q_r*L_i``), the
energy of the leakage flow that bypasses the runner (``rho*q_leak*E``), disc friction and
bearing losses. ``efficiency = P_shaft / P_h`` is the turbine (hydraulic + mechanical)
efficiency; the generator is not part of the model.

Loss coefficients are plain floats, named per model (``coefficient_names``), non-negative,
and are what :mod:`analytics.calibration` fits to a unit's reference data.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Protocol, Self, runtime_checkable

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Default water density [kg/m3] and gravity [m/s2] for callers without site data; real
#: callers pass ``analytics.water.density`` and ``analytics.site.local_gravity`` values.
RHO_DEFAULT = 999.7
G_DEFAULT = 9.81


@dataclass
class RunnerSolution:
    """One solved operating state per element (all arrays share one shape).

    Attributes
    ----------
    head : [m] net head H
    specific_energy : [J/kg] E = g H
    flow : [m3/s] turbine flow Q (high-pressure section)
    runner_flow : [m3/s] Q_r = Q - q_leak, the flow that does work on the blades
    runner_work : [J/kg] Euler specific work Y = U1 c_theta1 - U2 c_theta2
    hydraulic_power : [W] P_h = rho Q E
    shaft_power : [W] P = rho Q_r Y - mechanical losses
    efficiency : P / P_h, fraction (NaN where the state has no flow)
    losses : name -> [W] each loss power; P_h = P + sum(losses) to round-off
    converged : bool, False where the flow root-find found no bracket (NaN results there)
    """

    head: NDArray
    specific_energy: NDArray
    flow: NDArray
    runner_flow: NDArray
    runner_work: NDArray
    hydraulic_power: NDArray
    shaft_power: NDArray
    efficiency: NDArray
    losses: dict[str, NDArray] = field(default_factory=dict)
    converged: NDArray | None = None

    def balance_residual(self) -> NDArray:
        """``P_h - P - sum(losses)`` [W]; zero to round-off for a closed balance."""
        total = sum(self.losses.values(), start=np.zeros_like(self.hydraulic_power))
        return self.hydraulic_power - self.shaft_power - total


@runtime_checkable
class RunnerModel(Protocol):
    """What the calibration, the hill chart and the demo generator need from a model."""

    runner_type: str  # "francis" | "kaplan" | "pelton"
    coefficients: Mapping[str, float]

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        """Names of the loss coefficients, in a fixed order."""
        ...

    def coefficient_bounds(self) -> dict[str, tuple[float, float]]:
        """Physically admissible (low, high) of each coefficient, for the fit."""
        ...

    def with_coefficients(self, values: Mapping[str, float]) -> Self:
        """A copy with some coefficients replaced (unknown names raise KeyError)."""
        ...

    def solve(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, *,
              blade_angle: ArrayLike | None = None, jets: ArrayLike | None = None,
              rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT) -> RunnerSolution:
        """Solve the operating state.

        Parameters
        ----------
        head : [m] net head
        speed : [rad/s] rotational speed
        opening : fraction 0..1 of the regulating organ (guide vanes; Pelton needle stroke)
        blade_angle : [rad] Kaplan only; None means on-cam (or the model's own optimum)
        jets : Pelton only, number of active jets; None means all
        rho : [kg/m3] water density
        g : [m/s2] local gravity
        """
        ...


def bisect_vectorised(func, low: NDArray, high: NDArray, *, iterations: int = 60
                      ) -> tuple[NDArray, NDArray]:
    """Vectorised bisection for ``func(x) = 0`` on brackets ``[low, high]`` elementwise.

    ``func`` takes and returns arrays of the brackets' shape. Returns ``(root, ok)`` where
    ``ok`` is False (and ``root`` NaN) where ``func`` does not change sign over the bracket.
    60 halvings shrink any bracket by 2**-60, below double precision of the result.
    """
    lo = np.array(low, dtype=float)
    hi = np.array(high, dtype=float)
    f_lo = func(lo)
    f_hi = func(hi)
    ok = np.isfinite(f_lo) & np.isfinite(f_hi) & (np.sign(f_lo) != np.sign(f_hi))
    ok |= (f_lo == 0.0) | (f_hi == 0.0)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        f_mid = func(mid)
        left = np.sign(f_mid) == np.sign(f_lo)
        lo = np.where(left, mid, lo)
        f_lo = np.where(left, f_mid, f_lo)
        hi = np.where(left, hi, mid)
    root = np.where(ok, 0.5 * (lo + hi), np.nan)
    return root, ok
