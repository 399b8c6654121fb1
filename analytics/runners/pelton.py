"""Mean-line reference model of a Pelton runner (impulse turbine, explicit in the flow).

Model (Dixon & Hall, *Fluid Mechanics and Thermodynamics of Turbomachinery*, 7th ed.,
ch. 9, Pelton wheel; the same derivation in most hydraulic-machines texts):

- Jet speed ``c1 = Cv sqrt(2 E)`` with ``E = g H`` (IEC 60041 net head of an impulse
  turbine, low-pressure reference at the jet circle). The nozzle loss coefficient
  ``zeta(y)`` gives ``E = (1 + zeta(y)) c1^2 / 2``, i.e. ``Cv(y) = 1 / sqrt(1 + zeta(y))``,
  with a part that grows as the needle closes (stroke ``y``)::

      zeta(y) = zeta_n + k_s (1 - y) / y

  ``zeta_n`` is the full-stroke loss, ``k_s`` the part-stroke coefficient (zero extra loss
  at full stroke, growing ~1/y). Why ~1/y: the flow leaves through the annular gap between
  needle and nozzle mouth, whose width is about proportional to the stroke, while the
  wall boundary layers on needle and mouth keep their thickness (it is set by the
  run length and the Reynolds number, not by the gap; Schlichting, *Boundary-Layer Theory*,
  turbulent flat plate), so the share of the flow in the boundary layers, and the energy
  it loses, rises as 1/y; the jet also leaves less compact (more dispersion) at small
  strokes. The 1/y form is this scaling argument (from memory), not a published law;
  ``k_s`` is what calibration fits to a unit's part-load points. It is why multi-jet units
  switch jets off at part load: at the same total flow, fewer jets run at larger strokes.
- Jet flow per jet ``A_jet c1`` with the jet area linear in the needle stroke,
  ``A_jet = y * jet_area_ratio * pi d0^2 / 4`` (linear-in-stroke law: common practice; the
  true needle law flattens near full stroke). ``Q = jets * A_jet * c1(y)``; no root-find.
  With ``k_s > 0`` the flow is slightly below linear in the stroke (``c1`` falls with it).
- Bucket speed ``U = omega D / 2``; relative inlet speed ``w1 = c1 - U``; the bucket
  friction coefficient ``zeta_b`` leaves ``w2 = k w1`` with ``k = sqrt(1 - zeta_b)``.
- Runner work (Euler, domain.md §3; Dixon & Hall eq. for the Pelton wheel)
  ``Y = U (c1 - U) (1 - k cos(beta2))``, with ``beta2`` the bucket outlet angle measured
  from the incoming relative direction so that a full U-turn is 180 deg (``cos = -1``).
  This angle is *not* measured from the meridional direction: a Pelton has no
  meridional through-flow; :meth:`PeltonModel.triangles` maps it onto the project's
  triangle convention (``c_m`` = the lateral exit component).
- Losses per unit mass of jet flow: nozzle ``zeta_n c1^2/2``, part stroke
  ``k_s (1 - y)/y c1^2/2``, bucket friction
  ``(w1^2 - w2^2)/2 = zeta_b w1^2 / 2``, residual exit kinetic energy ``c2^2/2``; and the
  mechanical terms windage ``k_w rho omega^3 R^5`` (``R = D/2``; the coefficient carries
  the density ratio of the spray-laden casing air to water) and bearing ``k_b omega^2``.
  Algebraically ``E = Y + nozzle + stroke + bucket + exit`` exactly, so the balance
  closes. Not modelled: the bucket's dependence on the jet-to-bucket-width ratio and
  spray interference between jets; with them a single jet count would peak below full
  stroke (from memory), here it peaks at full stroke, so the best jet count at a power
  is always the fewest that can carry it.

The formulas hold for ``0 <= U <= c1``; above it the model returns the (negative) work the
algebra gives. Loss-free (all coefficients zero) still loses the exit kinetic energy:
``Y = E - c2^2/2``, and ``Y = E`` only at ``U = c1/2`` with ``beta2 = 180 deg``.

The model is a reference for efficiency-drift monitoring, not a design tool: the service
advises, operating limits, local codes and licensed practice prevail. The jet count that
comes out best here is a reference, not a switching schedule: the unit's own schedule
(runner, nozzle and governor limits, minimum strokes) prevails.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Self

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.runners.base import G_DEFAULT, RHO_DEFAULT, RunnerSolution
from analytics.triangles import VelocityTriangle, blade_speed

COEFFICIENT_NAMES = ("nozzle", "stroke", "bucket", "windage", "bearing")

#: Bearing loss bound, as for the Francis model: at a bucket speed of 100 m/s at most 5 %
#: of the power scale rho omega^3 R^5.
_BEARING_TIP_SPEED = 100.0
_BEARING_FRACTION = 0.05


@dataclass(frozen=True)
class PeltonGeometry:
    """Main dimensions of a Pelton runner and its nozzles (SI).

    Attributes
    ----------
    pitch_diameter : [m] D, jet-circle (pitch) diameter
    jet_count : number of nozzles
    nozzle_diameter : [m] d0, nozzle mouth diameter at full stroke
    bucket_outlet_angle : [rad] beta2, relative-flow deflection, full U-turn = pi
    jet_area_ratio : effective jet area at full stroke over ``pi d0^2 / 4``; 1.0 takes the
        nozzle diameter as the jet diameter at full stroke
    """

    pitch_diameter: float
    jet_count: int
    nozzle_diameter: float
    bucket_outlet_angle: float
    jet_area_ratio: float = 1.0

    def __post_init__(self) -> None:
        if not self.pitch_diameter > 0 or not self.nozzle_diameter > 0:
            raise ValueError("pitch_diameter and nozzle_diameter must be positive")
        if int(self.jet_count) != self.jet_count or self.jet_count < 1:
            raise ValueError("jet_count must be a positive integer")
        if not 0.0 < self.bucket_outlet_angle <= np.pi:
            raise ValueError("bucket_outlet_angle must be in (0, pi] [rad]")
        if not 0.0 < self.jet_area_ratio <= 1.0:
            raise ValueError("jet_area_ratio must be in (0, 1]")

    @property
    def full_jet_area(self) -> float:
        """[m2] effective area of one jet at full stroke."""
        return self.jet_area_ratio * np.pi * self.nozzle_diameter**2 / 4.0


class PeltonModel:
    """Pelton reference model (implements :class:`analytics.runners.base.RunnerModel`).

    Parameters
    ----------
    geometry : PeltonGeometry
    coefficients : mapping with every name of :data:`COEFFICIENT_NAMES`, non-negative:
        ``nozzle`` zeta_n [-] (full stroke), ``stroke`` k_s [-] (part-stroke nozzle loss),
        ``bucket`` zeta_b [-] (at most 1), ``windage`` k_w [-], ``bearing`` k_b [W s2].
        See :func:`design_coefficients` for typical values.
    """

    runner_type = "pelton"

    def __init__(self, geometry: PeltonGeometry, coefficients: Mapping[str, float]) -> None:
        unknown = set(coefficients) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Pelton coefficients: {sorted(unknown)}")
        missing = [n for n in COEFFICIENT_NAMES if n not in coefficients]
        if missing:
            raise ValueError(f"missing Pelton coefficients: {missing}")
        values = {n: float(coefficients[n]) for n in COEFFICIENT_NAMES}
        bad = [n for n, v in values.items() if not v >= 0]
        if bad:
            raise ValueError(f"coefficients must be non-negative: {bad}")
        if values["bucket"] > 1.0:
            raise ValueError("bucket friction coefficient must be at most 1 (w2 = 0)")
        self.geometry = geometry
        self.coefficients: Mapping[str, float] = MappingProxyType(values)

    def __repr__(self) -> str:
        return f"PeltonModel({self.geometry!r}, {dict(self.coefficients)!r})"

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        """Names of the loss coefficients, in a fixed order."""
        return COEFFICIENT_NAMES

    def coefficient_bounds(self) -> dict[str, tuple[float, float]]:
        """Physically admissible (low, high) of each coefficient.

        ``nozzle`` up to 0.25 (Cv down to 0.89); ``stroke`` up to 0.1 (with ``zeta_n`` 0.03
        that is Cv 0.84 at 20 % stroke); ``bucket`` up to 1 (``w2 = 0``); ``windage`` up to
        0.1; ``bearing`` as :data:`_BEARING_FRACTION` states.
        """
        radius = self.geometry.pitch_diameter / 2.0
        bearing_max = _BEARING_FRACTION * RHO_DEFAULT * _BEARING_TIP_SPEED * radius**4
        return {"nozzle": (0.0, 0.25), "stroke": (0.0, 0.1), "bucket": (0.0, 1.0),
                "windage": (0.0, 0.1), "bearing": (0.0, bearing_max)}

    def with_coefficients(self, values: Mapping[str, float]) -> Self:
        """A copy with some coefficients replaced (unknown names raise KeyError)."""
        unknown = set(values) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Pelton coefficients: {sorted(unknown)}")
        return type(self)(self.geometry, {**self.coefficients, **values})

    @property
    def velocity_coefficient(self) -> float:
        """Cv at full stroke, ``1 / sqrt(1 + zeta_n)`` [-]."""
        return float(1.0 / np.sqrt(1.0 + self.coefficients["nozzle"]))

    def velocity_coefficient_at(self, opening: ArrayLike) -> NDArray:
        """Cv at a needle stroke, ``1 / sqrt(1 + zeta_n + k_s (1 - y)/y)`` [-].

        ``opening`` is the stroke fraction ``y`` in [0, 1]; NaN outside. ``y = 0`` gives 0
        when ``k_s > 0`` (the limit) and the full-stroke value when ``k_s = 0``.
        """
        y = np.asarray(opening, dtype=float)
        return np.sqrt(self._kinetic_fraction(y))

    def _kinetic_fraction(self, y: NDArray) -> NDArray:
        """``Cv(y)^2 = y / (y (1 + zeta_n) + k_s (1 - y))``, written without 1/y."""
        zeta_n, k_s = self.coefficients["nozzle"], self.coefficients["stroke"]
        inside = (y >= 0) & (y <= 1)
        denominator = y * (1.0 + zeta_n) + k_s * (1.0 - y)
        full = 1.0 / (1.0 + zeta_n)
        with np.errstate(invalid="ignore", divide="ignore"):
            fraction = np.where(denominator > 0, y / np.where(denominator > 0, denominator,
                                                              1.0), full)
        return np.where(inside, fraction, np.nan)

    @property
    def velocity_ratio(self) -> float:
        """k = w2 / w1 = sqrt(1 - zeta_b) [-]."""
        return float(np.sqrt(1.0 - self.coefficients["bucket"]))

    def jet_speed(self, head: ArrayLike, g: ArrayLike = G_DEFAULT, opening: ArrayLike = 1.0
                  ) -> NDArray:
        """Jet speed ``c1 = Cv(y) sqrt(2 g H)`` [m/s] for a net head [m] and stroke ``y``."""
        energy = np.asarray(g, dtype=float) * np.asarray(head, dtype=float)
        fraction = self._kinetic_fraction(np.asarray(opening, dtype=float))
        with np.errstate(invalid="ignore"):
            return np.sqrt(2.0 * energy * fraction)

    def triangles(self, head: ArrayLike, speed: ArrayLike, g: ArrayLike = G_DEFAULT,
                  opening: ArrayLike = 1.0) -> tuple[VelocityTriangle, VelocityTriangle]:
        """Inlet and outlet triangles of the bucket (mean streamline).

        Inlet: ``u = U``, ``c_theta = c1``, ``c_m = 0`` (the jet is tangential). Outlet:
        ``c_theta2 = U + k w1 cos(beta2)`` and the lateral component
        ``k w1 sin(beta2)`` stored as ``c_m``, so :func:`analytics.triangles.euler_work_of`
        gives the Pelton runner work.

        Parameters
        ----------
        head : [m], speed : [rad/s], g : [m/s2], opening : needle stroke fraction
        """
        c1 = self.jet_speed(head, g, opening)
        u = blade_speed(speed, self.geometry.pitch_diameter / 2.0)
        w2 = self.velocity_ratio * (c1 - u)
        beta2 = self.geometry.bucket_outlet_angle
        inlet = VelocityTriangle(u, np.zeros_like(c1 * u), c1)
        outlet = VelocityTriangle(u, w2 * np.sin(beta2), u + w2 * np.cos(beta2))
        return inlet, outlet

    def solve(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, *,
              blade_angle: ArrayLike | None = None, jets: ArrayLike | None = None,
              rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT) -> RunnerSolution:
        """Solve the operating state for net head, speed, needle stroke and active jets.

        Parameters
        ----------
        head : [m] net head
        speed : [rad/s] rotational speed
        opening : needle stroke fraction 0..1 (same on every active jet); outside [0, 1]
            gives NaN results and ``converged`` False
        blade_angle : not used by a Pelton runner (ignored)
        jets : number of active jets, an integer 0..jet_count; None means all
        rho : [kg/m3] water density
        g : [m/s2] local gravity

        Returns
        -------
        RunnerSolution
            Losses [W] ``nozzle``, ``stroke``, ``bucket``, ``exit`` (``rho Q L_i``),
            ``windage``, ``bearing``. No flow (stroke 0 or no jet) gives shaft power
            ``-(windage + bearing)`` and NaN efficiency.
        """
        del blade_angle
        geo = self.geometry
        k = self.coefficients
        n_jets = geo.jet_count if jets is None else jets
        h, omega, y, n, rho_w, g_loc = np.broadcast_arrays(
            *(np.asarray(v, dtype=float) for v in (head, speed, opening, n_jets, rho, g)))
        energy = g_loc * h
        valid = (np.isfinite(energy) & np.isfinite(omega) & np.isfinite(rho_w)
                 & (energy >= 0) & (y >= 0) & (y <= 1)
                 & (n >= 0) & (n <= geo.jet_count) & (n == np.round(n)))
        nan_mask = np.where(valid, 1.0, np.nan)
        fraction = self._kinetic_fraction(y) * nan_mask  # Cv(y)^2 = (c1^2/2) / E
        with np.errstate(invalid="ignore"):
            c1 = np.sqrt(2.0 * energy * fraction)
        flow = n * y * geo.full_jet_area * c1
        # part-stroke loss per kg k_s (1 - y)/y c1^2/2, written k_s (1 - y) E Cv^2/y with
        # Cv^2/y = 1/(y (1 + zeta_n) + k_s (1 - y)), which stays finite at y = 0
        stroke_loss = k["stroke"] * (1.0 - y) * energy * np.where(
            y > 0, fraction / np.where(y > 0, y, 1.0), 0.0)
        u = blade_speed(omega, geo.pitch_diameter / 2.0)
        w1 = c1 - u
        ratio = self.velocity_ratio
        cos_b, sin_b = np.cos(geo.bucket_outlet_angle), np.sin(geo.bucket_outlet_angle)
        work = u * w1 * (1.0 - ratio * cos_b)
        exit_sq = (u + ratio * w1 * cos_b) ** 2 + (ratio * w1 * sin_b) ** 2
        radius = geo.pitch_diameter / 2.0
        losses = {
            "nozzle": rho_w * flow * 0.5 * k["nozzle"] * c1**2,
            "stroke": rho_w * flow * stroke_loss,
            "bucket": rho_w * flow * 0.5 * k["bucket"] * w1**2,
            "exit": rho_w * flow * 0.5 * exit_sq,
            "windage": k["windage"] * rho_w * np.abs(omega) ** 3 * radius**5 * nan_mask,
            "bearing": k["bearing"] * omega**2 * nan_mask,
        }
        hydraulic_power = rho_w * flow * energy
        shaft_power = rho_w * flow * work - losses["windage"] - losses["bearing"]
        has_flow = flow > 0
        efficiency = np.where(has_flow,
                              shaft_power / np.where(has_flow, hydraulic_power, 1.0), np.nan)
        return RunnerSolution(
            head=h.copy(), specific_energy=energy, flow=flow, runner_flow=flow.copy(),
            runner_work=work, hydraulic_power=hydraulic_power, shaft_power=shaft_power,
            efficiency=efficiency, losses=losses, converged=valid.copy())


def design_coefficients(geometry: PeltonGeometry, *, speed: float, head: float,
                        rho: float = RHO_DEFAULT, g: float = G_DEFAULT) -> dict[str, float]:
    """Typical loss coefficients for a Pelton runner at its rated speed and head.

    - ``nozzle`` 0.03: Cv = 0.985 at full stroke (textbooks quote Cv 0.97-0.99, e.g.
      Dixon & Hall ch. 9);
    - ``stroke`` 0.01: Cv falls to 0.981 at half stroke, 0.967 at 20 % and 0.945 at 10 %
      stroke. From memory, not a published figure: needle nozzles keep their velocity
      coefficient within a point or two down to a quarter of the stroke and lose more
      below. The boundary-layer estimate of the module docstring (an energy thickness of
      ~1 mm on needle and mouth against a gap of ~30 mm at full stroke for a 0.15 m jet)
      puts the 1/y part of ``zeta`` at a few hundredths; 0.01 is the low end, because the
      real gap closes less than linearly at small strokes. Fit it to the unit's part-load
      points where it matters;
    - ``bucket`` 0.1: k = w2/w1 = 0.949 (common practice for polished modern buckets;
      textbook problems use 0.85-0.98);
    - ``windage`` such that windage and spray cost 0.5 % and ``bearing`` such that the
      bearings cost 0.2 % of the full-stroke, all-jets hydraulic power at the rated
      speed and head (common practice for large units, together about 0.5-1 %).

    With a bucket angle of 165 deg these give a best efficiency near 0.92 (all jets at
    full stroke). With jet switching (the best of 1..z jets at each power) the curve stays
    within about 3 points of it from 20 % to 100 % load, the fixed mechanical losses being
    most of that; all jets together at 20 % load lose about 2.4 points more.

    Parameters
    ----------
    geometry : PeltonGeometry
    speed : [rad/s] rated speed
    head : [m] rated net head
    rho : [kg/m3], g : [m/s2]

    Returns
    -------
    dict name -> coefficient, ready for :class:`PeltonModel`
    """
    nozzle = 0.03
    energy = g * head
    c1 = np.sqrt(2.0 * energy / (1.0 + nozzle))
    full_power = rho * geometry.jet_count * geometry.full_jet_area * c1 * energy
    radius = geometry.pitch_diameter / 2.0
    return {"nozzle": nozzle, "stroke": 0.01, "bucket": 0.1,
            "windage": float(0.005 * full_power / (rho * abs(speed) ** 3 * radius**5)),
            "bearing": float(0.002 * full_power / speed**2)}
