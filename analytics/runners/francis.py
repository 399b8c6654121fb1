"""Mean-line (velocity-triangle) reference model of a Francis runner.

Angles follow :mod:`analytics.triangles`: from the meridional direction, positive in the
direction of rotation; station 1 runner inlet, station 2 runner outlet.

Model, per unit mass of the runner flow ``Q_r`` (all terms [J/kg]):

- Distributor: the guide vanes set the absolute flow angle ``alpha1`` by the throat law
  ``cos(alpha1) = y cos(alpha1_full)`` (see :meth:`FrancisGeometry.flow_angle`). The
  vaneless space conserves ``r c_theta`` and, for a guide-vane height equal to ``b1``,
  ``r c_m`` too, so the angle reaches the runner inlet unchanged.
- Inlet: ``c_m1 = Q_r / (2 pi R1 b1)``, ``c_theta1 = c_m1 tan(alpha1)``.
- Outlet: the relative flow leaves along the blade, turned less by the deviation angle:
  ``beta2 = beta2b + delta2``, ``c_theta2 = U2 + c_m2 tan(beta2)``.
- Euler work ``Y = U1 c_theta1 - U2 c_theta2`` (:func:`analytics.triangles.euler_work`).
- Hydraulic losses of the runner flow, each with a dimensionless coefficient:

  * ``incidence``: shock loss ``k_inc (w_theta1 - c_m1b tan(beta1b))^2 / 2`` from the
    mismatch between the relative inlet flow and the blade (Pfleiderer & Petermann,
    *Stroemungsmaschinen*, "Stossverlust"; Dixon & Hall ch. 9 discuss the same term);
  * ``distributor``: spiral-case, stay-vane and guide-vane friction ``k_gv c1^2 / 2`` on
    the absolute velocity leaving the distributor (nearly constant at a fixed head, since
    the guide-vane throat opens with the flow; common practice);
  * ``friction``: passage friction of spiral case, distributor and runner lumped as
    ``k_f w2^2 / 2`` with ``w2 = c_m2b / cos(beta2)``, the outlet relative velocity, which
    is proportional to ``Q_r`` (a ``k Q^2`` friction law as in domain.md §3);
  * ``draft_tube``: unrecovered meridional outlet kinetic energy ``k_dt c_m2^2 / 2``;
  * ``swirl``: outlet swirl energy not recovered by the draft tube ``k_sw c_theta2^2 / 2``.

- Seal leakage bypasses the runner: ``q_leak = C_d A_seal sqrt(2 (E - c1^2/2))``, orifice
  flow under the static specific energy left at the runner inlet (distributor losses and
  draft-tube recovery neglected; common practice). ``Q = Q_r + q_leak``; the leakage
  flow's whole energy ``rho q_leak E`` is lost.
- Mechanical: disc friction ``k_disc rho omega^3 R1^5`` (Daily & Nece 1960 form, both
  shrouds lumped) and bearing loss ``k_b omega^2`` (viscous bearing, common practice).

For a head and an opening the runner flow solves ``E = Y(Q_r) + sum_i L_i(Q_r)`` with
``E = g H`` (IEC 60041): a 1-D root per element by vectorised bisection. Because every
loss is non-negative and ``Y`` is affine in ``Q_r``, the root lies below ``Q*`` with
``Y(Q*) = E``; the residual ``E - Y - sum L`` is concave in ``Q_r``, and the physical root is
the one on its falling branch (there flow rises with head, ``dQ/dE > 0``).

"Loss-free" means every coefficient is zero: an ideal distributor and runner, no leakage,
no mechanical loss, and an ideal draft tube that recovers the whole runner-outlet kinetic
energy including the swirl. Then ``Y = E`` and the efficiency is 1 at every opening.

The model is a reference for efficiency-drift monitoring. It is not a design tool and it
does not predict cavitation or rough-zone limits: the service advises, operating limits,
local codes and licensed practice prevail.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import NamedTuple, Self

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.runners.base import (
    G_DEFAULT,
    RHO_DEFAULT,
    RunnerSolution,
    bisect_vectorised,
)
from analytics.triangles import VelocityTriangle, blade_speed, euler_work

#: Fraction of full opening at which a Francis unit usually meets its design
#: (shock-free, swirl-free) flow angle; common practice, about 0.75-0.85.
DESIGN_OPENING = 0.8
#: Radial clearance of a labyrinth seal per metre of runner diameter; common practice
#: (about 0.4-0.6 mm per m).
SEAL_CLEARANCE_PER_DIAMETER = 5.0e-4
#: Kinematic viscosity of water near 15-20 degC [m2/s] for the disc-friction Reynolds
#: number (about 1.0e-6 at 20 degC; from memory).
WATER_VISCOSITY = 1.0e-6

COEFFICIENT_NAMES = ("incidence", "distributor", "friction", "draft_tube", "swirl", "leakage",
                     "disc", "bearing")
_HYDRAULIC = ("incidence", "distributor", "friction", "draft_tube", "swirl")

#: Bearing loss bound: at a tip speed of 100 m/s the bearing loss may reach at most 5 % of
#: the disc-friction power scale rho omega^3 R^5 (a generous physical bound).
_BEARING_TIP_SPEED = 100.0
_BEARING_FRACTION = 0.05


@dataclass(frozen=True)
class FrancisGeometry:
    """Main dimensions of a Francis runner and its distributor (SI).

    Attributes
    ----------
    inlet_radius : [m] R1, runner inlet (blade leading-edge) radius
    inlet_height : [m] b1, inlet (and guide-vane) height
    outlet_radius : [m] R2, mean (rms) radius of the blade outlet edge
    blade_inlet_angle : [rad] beta1b, from meridional, positive with the rotation
    blade_outlet_angle : [rad] beta2b, from meridional (negative for a Francis runner)
    outlet_area : [m2] A2, through-flow area of the outlet; None means ``2 pi R2^2``, the
        disc whose rms radius is R2 (no hub)
    full_opening_angle : [rad] alpha1 at opening 1 for the throat law; None derives it
        from the design flow angle at opening :data:`DESIGN_OPENING` (common practice)
    inlet_blockage, outlet_blockage : fraction 0..1 of the through-flow area taken by the
        blades
    outlet_deviation : [rad] delta2 >= 0, the flow leaves at ``beta2b + delta2`` (turned
        less than the blade; towards meridional for the usual negative beta2b)
    seal_area : [m2] total clearance area of the crown and band seals; None means
        ``2 * 2 pi R1 s`` with ``s = 5e-4 * 2 R1`` (common practice)

    Derived defaults are stored in their fields on construction, so
    ``dataclasses.replace`` keeps them; pass ``None`` again to re-derive.
    """

    inlet_radius: float
    inlet_height: float
    outlet_radius: float
    blade_inlet_angle: float
    blade_outlet_angle: float
    outlet_area: float | None = None
    full_opening_angle: float | None = None
    inlet_blockage: float = 0.0
    outlet_blockage: float = 0.0
    outlet_deviation: float = 0.0
    seal_area: float | None = None

    def __post_init__(self) -> None:
        for name in ("inlet_radius", "inlet_height", "outlet_radius"):
            if not getattr(self, name) > 0:
                raise ValueError(f"{name} must be positive")
        for name in ("inlet_blockage", "outlet_blockage"):
            if not 0.0 <= getattr(self, name) < 1.0:
                raise ValueError(f"{name} must be in [0, 1)")
        for name in ("blade_inlet_angle", "blade_outlet_angle"):
            if not abs(getattr(self, name)) < np.pi / 2:
                raise ValueError(f"{name} must lie strictly between -pi/2 and pi/2 [rad]")
        if self.outlet_area is None:
            object.__setattr__(self, "outlet_area", 2.0 * np.pi * self.outlet_radius**2)
        elif not self.outlet_area > 0:
            raise ValueError("outlet_area must be positive")
        if self.seal_area is None:
            clearance = SEAL_CLEARANCE_PER_DIAMETER * 2.0 * self.inlet_radius
            object.__setattr__(self, "seal_area",
                               2.0 * 2.0 * np.pi * self.inlet_radius * clearance)
        elif not self.seal_area >= 0:
            raise ValueError("seal_area must be non-negative")
        if not np.tan(self.outlet_flow_angle) < 0:
            raise ValueError("the outlet flow angle beta2b + delta2 must be negative: the "
                             "relative flow of a Francis runner leaves against the rotation")
        if self.full_opening_angle is None:
            cos_full = np.cos(self.design_flow_angle) / DESIGN_OPENING
            if not 0.0 < cos_full <= 1.0:
                raise ValueError("cannot derive full_opening_angle; give it explicitly")
            object.__setattr__(self, "full_opening_angle", float(np.arccos(cos_full)))
        elif not 0.0 <= self.full_opening_angle < np.pi / 2:
            raise ValueError("full_opening_angle must be in [0, pi/2) [rad]")

    @property
    def inlet_area(self) -> float:
        """[m2] ``2 pi R1 b1``, the inlet through-flow area without blockage."""
        return 2.0 * np.pi * self.inlet_radius * self.inlet_height

    @property
    def outlet_flow_angle(self) -> float:
        """[rad] beta2 = beta2b + delta2, the relative outlet flow angle."""
        return self.blade_outlet_angle + self.outlet_deviation

    @property
    def design_flow_coefficient(self) -> float:
        """[m3/rad] ``Q_d / omega``: the swirl-free runner flow per unit of speed.

        From ``U2 + c_m2b tan(beta2) = 0``: ``Q_d = -omega R2 A2 (1 - B2) / tan(beta2)``.
        """
        return (-self.outlet_radius * self.outlet_area * (1.0 - self.outlet_blockage)
                / np.tan(self.outlet_flow_angle))

    @property
    def design_flow_angle(self) -> float:
        """[rad] alpha1 at which the swirl-free flow also enters shock-free.

        ``tan(alpha_d) = R1 A1 / (Q_d/omega) + tan(beta1b) / (1 - B1)``: a property of the
        geometry alone, independent of speed and head.
        """
        tan_alpha = (self.inlet_radius * self.inlet_area / self.design_flow_coefficient
                     + np.tan(self.blade_inlet_angle) / (1.0 - self.inlet_blockage))
        return float(np.arctan(tan_alpha))

    def flow_angle(self, opening: ArrayLike) -> NDArray:
        """Guide-vane outlet flow angle alpha1 [rad] for an opening fraction.

        Throat-area law ``cos(alpha1) = y cos(alpha1_full)``: the throat width between two
        guide vanes grows in proportion to the opening, and the flow leaves the cascade at
        ``cos(alpha1) = throat / pitch`` (the cosine rule of cascade outflow, Pfleiderer &
        Petermann; the same rule as for a turbine nozzle row, Dixon & Hall ch. 3).
        NaN where ``y cos(alpha1_full) > 1`` (beyond the law's range) or ``y < 0``.

        Parameters
        ----------
        opening : fraction of full opening (1 = full)
        """
        cos_alpha = np.asarray(opening, dtype=float) * np.cos(self.full_opening_angle)
        with np.errstate(invalid="ignore"):
            return np.where((cos_alpha >= 0) & (cos_alpha <= 1), np.arccos(cos_alpha),
                            np.nan)


class FrancisState(NamedTuple):
    """Triangles, work and specific losses [J/kg] of one runner flow."""

    inlet: VelocityTriangle
    outlet: VelocityTriangle
    work: NDArray
    incidence: NDArray
    distributor: NDArray
    friction: NDArray
    draft_tube: NDArray
    swirl: NDArray


class FrancisModel:
    """Francis reference model (implements :class:`analytics.runners.base.RunnerModel`).

    Parameters
    ----------
    geometry : FrancisGeometry
    coefficients : mapping with every name of :data:`COEFFICIENT_NAMES`, non-negative:
        ``incidence``, ``distributor``, ``friction``, ``draft_tube``, ``swirl`` [-],
        ``leakage`` (seal discharge coefficient C_d on ``geometry.seal_area``) [-],
        ``disc`` [-] and
        ``bearing`` [W s2] (bearing loss ``bearing * omega^2``). See
        :func:`design_coefficients` for typical values.
    """

    runner_type = "francis"

    def __init__(self, geometry: FrancisGeometry, coefficients: Mapping[str, float]) -> None:
        unknown = set(coefficients) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Francis coefficients: {sorted(unknown)}")
        missing = [n for n in COEFFICIENT_NAMES if n not in coefficients]
        if missing:
            raise ValueError(f"missing Francis coefficients: {missing}")
        values = {n: float(coefficients[n]) for n in COEFFICIENT_NAMES}
        bad = [n for n, v in values.items() if not v >= 0]
        if bad:
            raise ValueError(f"coefficients must be non-negative: {bad}")
        self.geometry = geometry
        self.coefficients: Mapping[str, float] = MappingProxyType(values)

    def __repr__(self) -> str:
        return f"FrancisModel({self.geometry!r}, {dict(self.coefficients)!r})"

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        """Names of the loss coefficients, in a fixed order."""
        return COEFFICIENT_NAMES

    def coefficient_bounds(self) -> dict[str, tuple[float, float]]:
        """Physically admissible (low, high) of each coefficient.

        ``draft_tube`` at most 1 (a fraction of the meridional outlet kinetic energy);
        ``swirl`` up to 2 (swirl also drives separation and a vortex rope in the draft tube,
        so it can cost more than its own energy); shock loss at most twice the Carnot
        value; ``distributor`` up to 0.2; ``leakage`` up to 5 (worn seals enlarge the nominal area);
        ``disc`` up to 0.01 (Daily & Nece C_M is about 1e-4..1e-3 at prototype Reynolds
        numbers); ``bearing`` as in :data:`_BEARING_FRACTION`.
        """
        r1 = self.geometry.inlet_radius
        bearing_max = _BEARING_FRACTION * RHO_DEFAULT * _BEARING_TIP_SPEED * r1**4
        return {"incidence": (0.0, 2.0), "distributor": (0.0, 0.2), "friction": (0.0, 1.0),
                "draft_tube": (0.0, 1.0), "swirl": (0.0, 2.0), "leakage": (0.0, 5.0),
                "disc": (0.0, 0.01), "bearing": (0.0, bearing_max)}

    def with_coefficients(self, values: Mapping[str, float]) -> Self:
        """A copy with some coefficients replaced (unknown names raise KeyError)."""
        unknown = set(values) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Francis coefficients: {sorted(unknown)}")
        return type(self)(self.geometry, {**self.coefficients, **values})

    def state(self, runner_flow: ArrayLike, speed: ArrayLike, opening: ArrayLike
              ) -> FrancisState:
        """Velocity triangles, Euler work and specific hydraulic losses at a runner flow.

        Parameters
        ----------
        runner_flow : [m3/s] Q_r
        speed : [rad/s] omega
        opening : guide-vane opening fraction (sets alpha1, see
            :meth:`FrancisGeometry.flow_angle`)
        """
        alpha1 = self.geometry.flow_angle(opening)
        return self._state(np.asarray(runner_flow, dtype=float),
                           np.asarray(speed, dtype=float), np.tan(alpha1))

    def _state(self, q_r: NDArray, omega: NDArray, tan_a1: NDArray) -> FrancisState:
        geo = self.geometry
        k = self.coefficients
        u1 = blade_speed(omega, geo.inlet_radius)
        u2 = blade_speed(omega, geo.outlet_radius)
        c_m1 = q_r / geo.inlet_area  # vaneless space, before the blades
        c_m1b = c_m1 / (1.0 - geo.inlet_blockage)  # inside the blade row
        c_m2 = q_r / geo.outlet_area  # draft-tube inlet
        c_m2b = c_m2 / (1.0 - geo.outlet_blockage)  # at the trailing edge
        inlet = VelocityTriangle(u1, c_m1, c_m1 * tan_a1)
        outlet = VelocityTriangle.from_blade_angle(u2, c_m2b, geo.outlet_flow_angle)
        work = euler_work(u1, inlet.c_theta, u2, outlet.c_theta)
        shock = inlet.w_theta - c_m1b * np.tan(geo.blade_inlet_angle)
        w2 = c_m2b / np.cos(geo.outlet_flow_angle)
        return FrancisState(
            inlet=inlet, outlet=outlet, work=work,
            incidence=0.5 * k["incidence"] * shock**2,
            distributor=0.5 * k["distributor"] * inlet.c**2,
            friction=0.5 * k["friction"] * w2**2,
            draft_tube=0.5 * k["draft_tube"] * c_m2**2,
            swirl=0.5 * k["swirl"] * outlet.c_theta**2)

    def _residual(self, q_r: NDArray, energy: NDArray, omega: NDArray, tan_a1: NDArray
                  ) -> NDArray:
        s = self._state(q_r, omega, tan_a1)
        return energy - s.work - sum(getattr(s, name) for name in _HYDRAULIC)

    def _runner_flow(self, energy: NDArray, omega: NDArray, tan_a1: NDArray,
                     active: NDArray) -> tuple[NDArray, NDArray]:
        """Root ``Q_r`` of the energy equation on the falling branch, and its ok flag."""
        def residual(q: NDArray) -> NDArray:
            return self._residual(q, energy, omega, tan_a1)

        zero = np.zeros_like(energy)
        work0 = self._state(zero, omega, tan_a1).work
        slope = self._state(zero + 1.0, omega, tan_a1).work - work0  # Y is affine in Q_r
        head_room = energy - work0
        # With all losses >= 0, residual(q*) <= 0 at Y(q*) = E; the margin keeps the sign
        # strict for a loss-free model.
        usable = (slope > 0) & (head_room > 0)
        q_hi = np.where(usable, head_room / np.where(usable, slope, 1.0), 0.0) * (1 + 1e-9)
        fallback = self.geometry.outlet_area * np.sqrt(2.0 * np.abs(energy)) + 1e-12
        q_hi = np.where(usable, q_hi + 1e-12, fallback)
        for _ in range(64):  # doubling only where the affine bound does not apply
            high = active & (residual(q_hi) > 0)
            if not np.any(high):
                break
            q_hi = np.where(high, 2.0 * q_hi, q_hi)
        # Lower bracket: the best of a coarse grid, at or beyond the residual's maximum
        # (the residual is concave), so [q_lo, q_hi] holds only the falling-branch root.
        grid = np.linspace(0.0, 1.0, 33).reshape((-1,) + (1,) * energy.ndim) * q_hi
        on_grid = residual(grid)
        best = np.argmax(np.where(np.isfinite(on_grid), on_grid, -np.inf), axis=0)
        q_lo = np.take_along_axis(grid, best[np.newaxis], axis=0)[0]
        return bisect_vectorised(residual, q_lo, q_hi)

    def solve(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, *,
              blade_angle: ArrayLike | None = None, jets: ArrayLike | None = None,
              rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT) -> RunnerSolution:
        """Solve the operating state for net head, speed and guide-vane opening.

        Parameters
        ----------
        head : [m] net head H
        speed : [rad/s] rotational speed
        opening : guide-vane opening fraction (0 closed, 1 full); above 1 allowed while
            the throat law holds, NaN results beyond it
        blade_angle, jets : not used by a Francis runner (ignored)
        rho : [kg/m3] water density
        g : [m/s2] local gravity

        Returns
        -------
        RunnerSolution
            Losses [W] ``incidence``, ``distributor``, ``friction``, ``draft_tube``, ``swirl``
            (``rho Q_r L_i``), ``leakage`` (``rho q_leak E``), ``disc``, ``bearing``.
            A closed distributor (opening <= 0) gives zero flow, shaft power
            ``-(disc + bearing)`` and NaN efficiency. ``converged`` is False (NaN results)
            for non-finite inputs, non-positive head with an open distributor, or no root.
        """
        del blade_angle, jets
        h, omega, y, rho_w, g_loc = np.broadcast_arrays(
            *(np.asarray(v, dtype=float) for v in (head, speed, opening, rho, g)))
        geo = self.geometry
        k = self.coefficients
        energy = g_loc * h
        finite = (np.isfinite(energy) & np.isfinite(omega) & np.isfinite(y)
                  & np.isfinite(rho_w))
        closed = finite & (y <= 0)
        alpha1 = geo.flow_angle(np.where(closed, 1.0, y))
        open_ = finite & ~closed & np.isfinite(alpha1) & (energy > 0)
        with np.errstate(all="ignore"):
            tan_a1 = np.where(open_, np.tan(alpha1), 1.0)
            safe_energy = np.where(open_, energy, 1.0)
            safe_omega = np.where(open_, omega, 0.0)
            q_r, ok = self._runner_flow(safe_energy, safe_omega, tan_a1, open_)
            q_r = np.where(open_ & ok, q_r, np.where(closed, 0.0, np.nan))
            s = self._state(q_r, omega, tan_a1)
            work = np.where(closed, 0.0, s.work)
            c1_sq = np.where(closed, 0.0, s.inlet.c**2)
            seal_energy = np.maximum(energy - 0.5 * c1_sq, 0.0)
            q_leak = k["leakage"] * geo.seal_area * np.sqrt(2.0 * seal_energy)
            q_leak = np.where(closed, 0.0, np.where(np.isnan(q_r), np.nan, q_leak))
            flow = q_r + q_leak
            losses = {name: rho_w * q_r * np.where(closed, 0.0, getattr(s, name))
                      for name in _HYDRAULIC}
            losses["leakage"] = rho_w * q_leak * energy
            mech_valid = np.where(closed | (open_ & ok), 1.0, np.nan)
            losses["disc"] = (k["disc"] * rho_w * np.abs(omega) ** 3
                              * geo.inlet_radius**5 * mech_valid)
            losses["bearing"] = k["bearing"] * omega**2 * mech_valid
            hydraulic_power = rho_w * flow * energy
            shaft_power = rho_w * q_r * work - losses["disc"] - losses["bearing"]
            efficiency = np.where(flow > 0, shaft_power / np.where(flow > 0,
                                                                   hydraulic_power, 1.0),
                                  np.nan)
        return RunnerSolution(
            head=h.copy(), specific_energy=energy, flow=flow, runner_flow=q_r,
            runner_work=np.where(np.isnan(q_r), np.nan, work),
            hydraulic_power=hydraulic_power, shaft_power=shaft_power,
            efficiency=efficiency, losses=losses, converged=closed | (open_ & ok))


def disc_friction_coefficient(speed: float, radius: float, *, gap_ratio: float = 0.05,
                              viscosity: float = WATER_VISCOSITY) -> float:
    """Disc-friction coefficient ``k_disc`` for ``P = k_disc rho omega^3 R^5`` (two sides).

    Daily & Nece (1960), turbulent flow with separate boundary layers (regime IV):
    moment coefficient per side ``C_M = 0.0102 (s/R)^0.1 Re^-0.2`` with
    ``Re = omega R^2 / nu`` and torque per side ``C_M rho omega^2 R^5 / 2`` (from memory).
    Two wetted sides (crown and band) give ``k_disc = C_M``.

    Parameters
    ----------
    speed : [rad/s] omega
    radius : [m] disc radius R
    gap_ratio : axial gap over radius s/R (0.05 common practice)
    viscosity : [m2/s] kinematic viscosity of water
    """
    reynolds = abs(speed) * radius**2 / viscosity
    return 0.0102 * gap_ratio**0.1 * reynolds**-0.2


def design_coefficients(geometry: FrancisGeometry, *, speed: float, head: float,
                        rho: float = RHO_DEFAULT, g: float = G_DEFAULT) -> dict[str, float]:
    """Typical loss coefficients for a Francis runner at its design (rated) point.

    Fixed values (common practice, chosen so that a large runner reaches the published
    best efficiencies of about 0.93-0.95 a little below its rated flow): ``incidence``
    0.7, ``distributor`` 0.03 (about 1-1.5 % of E in spiral case and distributor of a
    high-head unit), ``draft_tube`` 0.2, ``swirl`` 1.0 (outlet swirl energy lost),
    ``leakage`` 0.2 (effective C_d of a labyrinth seal on the nominal clearance area).
    ``disc`` from :func:`disc_friction_coefficient` at the design speed.
    ``bearing`` makes the bearing loss 0.15 % of the design hydraulic power at the
    design speed (common practice, 0.1-0.2 %).

    ``friction`` is derived: at the design flow ``Q_d = speed *
    geometry.design_flow_coefficient`` (shock-free and swirl-free) the hydraulic losses
    close the gap between ``E = g H`` and the Euler work, so the model's design point sits
    at the given head. It is clipped to :meth:`FrancisModel.coefficient_bounds` when the
    geometry and head disagree (then the design point moves to another head).

    Parameters
    ----------
    geometry : FrancisGeometry
    speed : [rad/s] rated speed
    head : [m] rated net head
    rho : [kg/m3], g : [m/s2]

    Returns
    -------
    dict name -> coefficient, ready for :class:`FrancisModel`
    """
    coefficients = {"incidence": 0.7, "distributor": 0.03, "friction": 0.0, "draft_tube": 0.2,
                    "swirl": 1.0, "leakage": 0.2,
                    "disc": disc_friction_coefficient(speed, geometry.inlet_radius),
                    "bearing": 0.0}
    model = FrancisModel(geometry, coefficients)
    q_d = speed * geometry.design_flow_coefficient
    energy = g * head
    s = model._state(np.asarray(q_d), np.asarray(speed), np.tan(geometry.design_flow_angle))
    # at the design flow incidence and swirl vanish; the rest of E - Y is friction
    w2_sq = (q_d / (geometry.outlet_area * (1.0 - geometry.outlet_blockage)
                    * np.cos(geometry.outlet_flow_angle))) ** 2
    others = sum(getattr(s, name) for name in _HYDRAULIC if name != "friction")
    friction = float((energy - s.work - others) / (0.5 * w2_sq))
    low, high = model.coefficient_bounds()["friction"]
    coefficients["friction"] = min(max(friction, low), high)
    coefficients["bearing"] = float(0.0015 * rho * q_d * energy / speed**2)
    return coefficients
