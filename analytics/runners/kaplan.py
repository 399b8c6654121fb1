"""Kaplan (axial, double-regulated) reference model: blade-element velocity triangles.

Sign convention (the project's domain primer, section 2; kept throughout): angles are
measured from the meridional (here axial; radial in the guide-vane ring) direction, positive
in the direction of rotation, ``c_theta = c_m tan(alpha)``, ``w_theta = c_m tan(beta)``,
``c_theta = U + w_theta``. Station 0 is the guide-vane outlet at radius ``R0``, station 1 the
runner inlet, station 2 the runner outlet. A turbine has ``alpha0 > 0`` (swirl with the
rotation) and blade angles ``beta < 0`` (the blades lean against the rotation).

Blade (servomotor) angle ``phi``: all blade sections turn together about the blade's radial
pivot, so ``beta_b(r) = beta_b_design(r) + phi`` at inlet and outlet. Positive ``phi`` turns
the blade towards the axial direction: it opens the runner and passes more water at a given
head. ``phi = 0`` is the design setting.

Model (blade-element, ``n`` stations at the centres of equal-area annuli, uniform axial
velocity ``c_m = Q_r / A``, so a mass average is the plain mean over the stations):

* guide vanes (radial ring, height ``b0`` at ``R0``): ``c_m0 = Q / (2 pi R0 b0)``,
  ``c_theta0 = c_m0 tan(alpha0)`` with the throat-area ("cosine") law
  ``cos(alpha0) = y cos(alpha0_full)`` for the opening fraction ``y``: the exit flow follows
  the throat, ``cos(alpha) = o/s`` (throat over pitch) with the throat ``o`` proportional to
  the opening (Dixon & Hall, Fluid Mechanics and Thermodynamics of Turbomachinery, 7th ed.,
  ch. 3, turbine cascade exit angle ``alpha2 ~ arccos(o/s)``; from memory). ``y -> 0``
  closes the ring: ``alpha0 -> 90 deg`` and no flow.
* vaneless space: no torque acts, so ``r c_theta = R0 c_theta0`` (free vortex) at every
  runner-inlet radius (conservation of angular momentum; Dixon & Hall ch. 9, from memory).
* runner outlet: the relative flow follows the blade, ``beta2 = beta2_b + delta``
  (``delta`` an optional constant deviation, positive = less turning), so
  ``c_theta2 = U + c_m tan(beta2)``.
* Euler per element ``Y(r) = U (c_theta1 - c_theta2)`` (``U1 = U2`` on cylindrical stream
  surfaces), mass-averaged.

Losses (J/kg of runner flow unless said; coefficients non-negative, named as the keys of
``RunnerSolution.losses``, each entry a power in W):

* ``incidence``: shock loss ``k/2 (w_theta1 - c_m tan beta1_b)^2``, the tangential
  relative-velocity mismatch at the leading edge (Pfleiderer & Petermann,
  Stroemungsmaschinen, "Stossverlust"; from memory). Shock and swirl losses are the two
  off-design terms of Zh. Zhang's analytical Kaplan model (Master equation, design
  equations and runaway speed of the Kaplan turbine, ZHAW).
* ``passage_friction``: ``k/2 (Q/A)^2``, spiral case, stay and guide vanes, runner passages.
* ``blade_friction``: ``k/2 <w2^2>``, blade-profile loss as a fraction of the exit
  relative-velocity head, the form in which textbook Kaplan exercises state the runner
  loss (common practice). Along the cam ``w2`` stays near ``U``, so this loss weighs most
  at part load, which puts a Kaplan's best efficiency at high load as observed. (Added to
  the loss list of the brief: without it the Q^2 terms put the best point far too low.)
* ``outlet_axial``: ``k/2 c_m^2``, the part of the runner-outlet axial kinetic energy the
  draft tube does not recover (``k = 1 - draft-tube efficiency``).
* ``outlet_swirl``: ``k/2 <c_theta2^2>``, swirl energy leaving the runner (mostly lost).
* ``tip_leakage``: flow through the blade-tip gap bypasses the runner,
  ``q = k pi D_t s sqrt(2 E)`` (orifice law, ``k`` a discharge coefficient,
  ``s`` the tip clearance); loss power ``rho q E``.
* ``disc_friction``: hub friction ``k rho omega^3 r_hub^5`` (``k`` the moment coefficient
  ``C_M`` of both faces, Daily & Nece 1960, ASME J. Basic Eng. 82; from memory).
* ``bearing``: guide and thrust bearings, ``k omega^2`` with ``k`` in W s^2 (Petroff: the
  friction torque of a hydrodynamic bearing is proportional to speed; from memory). This
  term, like real mechanical losses, does not follow hydraulic similarity (IEC 60193 keeps
  bearing losses out of the model-to-prototype step-up).

For a head, speed, opening and blade angle the runner flow solves ``E = Y + sum(L)`` (a
quadratic in ``Q_r``; solved by :func:`bisect_vectorised` as the contract asks). Then
``P = rho Q_r Y - P_disc - P_bearing`` and ``rho Q E = P + sum(losses)`` to round-off.

On-cam operation (``blade_angle=None``): the installed cam ``phi(y, H)`` if the geometry has
one; otherwise the blade angle that maximises the efficiency at that opening and head,
found by a vectorised search (a grid of ``blade_grid_points`` angles over the blade range,
then a golden-section refinement between the best grid point's neighbours; the better of
the two is kept).

Results advise. Operating limits, cam changes and protection settings stay with qualified
staff and the turbine and governor manufacturers' procedures.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Self

import numpy as np
from numpy.typing import ArrayLike, NDArray

from analytics.runners.base import G_DEFAULT, RHO_DEFAULT, RunnerSolution, bisect_vectorised

COEFFICIENT_NAMES = ("incidence", "passage_friction", "blade_friction", "outlet_axial",
                     "outlet_swirl", "tip_leakage", "disc_friction", "bearing")

#: Typical values for a large, well-kept Kaplan unit (common practice, orders of magnitude;
#: tuned so that the fictional demo unit below has a realistic double-regulated curve):
#: shock-loss factor 0.9 of the tangential mismatch head; water-passage friction 0.05 of
#: (Q/A)^2/2; blade-profile friction 1.6 % of the exit relative-velocity head; draft tube
#: recovering 88 % of the outlet axial kinetic energy and 60 % of the swirl energy; tip-gap
#: discharge coefficient 0.6; hub-disc moment coefficient 0.002; bearing losses about
#: 140 kW at 112.5 rpm (1000 W s^2, about 0.5 % of 30 MW).
TYPICAL_COEFFICIENTS: dict[str, float] = {
    "incidence": 0.9,
    "passage_friction": 0.05,
    "blade_friction": 0.016,
    "outlet_axial": 0.12,
    "outlet_swirl": 0.4,
    "tip_leakage": 0.6,
    "disc_friction": 0.002,
    "bearing": 1000.0,
}

#: Admissible ranges for a fit. ``incidence + outlet_swirl <= 2`` keeps the zero-flow
#: residual negative, so the flow root is unique (the balance is a quadratic in Q_r).
COEFFICIENT_BOUNDS: dict[str, tuple[float, float]] = {
    "incidence": (0.0, 1.2),
    "passage_friction": (0.0, 1.0),
    "blade_friction": (0.0, 0.2),
    "outlet_axial": (0.0, 1.0),
    "outlet_swirl": (0.0, 0.8),
    "tip_leakage": (0.0, 1.0),
    "disc_friction": (0.0, 0.02),
    "bearing": (0.0, 1.0e4),
}

#: Golden-section refinement steps of the on-cam search: 0.618**40 ~ 4e-9 of the bracket.
_GOLDEN_STEPS = 40


def station_radii(tip_diameter: float, hub_diameter: float, n: int) -> NDArray:
    """Radii [m] of ``n`` blade elements at the area centres of equal-area annuli."""
    rt2, rh2 = (tip_diameter / 2.0) ** 2, (hub_diameter / 2.0) ** 2
    return np.sqrt(rh2 + (np.arange(n) + 0.5) / n * (rt2 - rh2))


@dataclass(frozen=True)
class KaplanGeometry:
    """Geometry of a Kaplan unit (SI).

    Attributes
    ----------
    tip_diameter, hub_diameter : [m] runner
    blade_count : number of runner blades (recorded; the blade-element triangles without a
        slip model do not depend on it)
    guide_vane_height : [m] b0
    guide_vane_radius : [m] R0, radius of the guide-vane outlet
    guide_vane_angle_full : [rad] flow angle alpha0 at full opening (y = 1), from radial
    blade_inlet_angle_design, blade_outlet_angle_design : [rad] blade angles at
        ``phi = 0``, one per element, hub first, at the radii of :func:`station_radii`
        with ``n = len(...)`` elements
    blade_angle_min, blade_angle_max : [rad] servomotor range of phi
    tip_clearance : [m] blade-tip gap s
    outlet_deviation : [rad] delta, beta2 = beta2_b + delta
    cam_opening : opening fractions of the installed cam table (ascending, >= 2) or None
    cam_head : [m] net heads of the cam table (ascending, >= 2) or None
    cam_blade_angle : [rad] table ``[i_opening][i_head]`` or None
    """

    tip_diameter: float
    hub_diameter: float
    blade_count: int
    guide_vane_height: float
    guide_vane_radius: float
    guide_vane_angle_full: float
    blade_inlet_angle_design: tuple[float, ...]
    blade_outlet_angle_design: tuple[float, ...]
    blade_angle_min: float = math.radians(-12.0)
    blade_angle_max: float = math.radians(15.0)
    tip_clearance: float = 0.003
    outlet_deviation: float = 0.0
    cam_opening: tuple[float, ...] | None = None
    cam_head: tuple[float, ...] | None = None
    cam_blade_angle: tuple[tuple[float, ...], ...] | None = None

    def __post_init__(self) -> None:
        if not 0.0 < self.hub_diameter < self.tip_diameter:
            raise ValueError("need 0 < hub_diameter < tip_diameter")
        if min(self.guide_vane_height, self.guide_vane_radius, self.tip_clearance) < 0.0:
            raise ValueError("guide-vane height, radius and tip clearance must be >= 0")
        if not 0.0 <= self.guide_vane_angle_full < math.pi / 2:
            raise ValueError("guide_vane_angle_full must lie in [0, pi/2) rad")
        n = len(self.blade_outlet_angle_design)
        if n < 1 or len(self.blade_inlet_angle_design) != n:
            raise ValueError("blade inlet and outlet design angles need the same length >= 1")
        if self.blade_angle_min >= self.blade_angle_max:
            raise ValueError("blade_angle_min must be below blade_angle_max")
        design = np.concatenate([self.blade_inlet_angle_design, self.blade_outlet_angle_design])
        for phi in (self.blade_angle_min, self.blade_angle_max):
            if np.any(np.abs(design + phi) >= math.pi / 2):
                raise ValueError(f"blade angle {math.degrees(phi):.1f} deg turns an element "
                                 "past the tangential direction; narrow the blade range")
        cam = (self.cam_opening, self.cam_head, self.cam_blade_angle)
        if any(c is not None for c in cam):
            if any(c is None for c in cam):
                raise ValueError("cam_opening, cam_head and cam_blade_angle go together")
            y, h = np.asarray(self.cam_opening, float), np.asarray(self.cam_head, float)
            table = np.asarray(self.cam_blade_angle, float)
            if y.size < 2 or h.size < 2 or np.any(np.diff(y) <= 0) or np.any(np.diff(h) <= 0):
                raise ValueError("cam axes need at least two ascending values each")
            if table.shape != (y.size, h.size) or not np.all(np.isfinite(table)):
                raise ValueError(f"cam_blade_angle must be a finite {y.size}x{h.size} table")

    @property
    def radii(self) -> NDArray:
        """[m] radii of the blade elements."""
        return station_radii(self.tip_diameter, self.hub_diameter,
                             len(self.blade_outlet_angle_design))

    @property
    def annulus_area(self) -> float:
        """[m2] through-flow area of the runner, pi (r_t^2 - r_h^2)."""
        return math.pi / 4.0 * (self.tip_diameter ** 2 - self.hub_diameter ** 2)

    @property
    def has_cam(self) -> bool:
        return self.cam_blade_angle is not None

    def guide_vane_angle(self, opening: ArrayLike) -> NDArray:
        """[rad] guide-vane flow angle, throat law ``cos(alpha0) = y cos(alpha0_full)``.

        Openings are clipped to [0, 1]; ``y = 0`` gives pi/2 (closed ring, no flow).
        """
        y = np.clip(np.asarray(opening, dtype=float), 0.0, 1.0)
        return np.arccos(y * math.cos(self.guide_vane_angle_full))

    def cam_angle(self, opening: ArrayLike, head: ArrayLike) -> NDArray:
        """[rad] installed cam blade angle, bilinear in (opening, head [m]), clamped.

        Outside the table the nearest edge value holds (no extrapolation). Raises
        ValueError when the geometry has no cam.
        """
        if not self.has_cam:
            raise ValueError("this geometry has no installed cam table")
        ys = np.asarray(self.cam_opening, dtype=float)
        hs = np.asarray(self.cam_head, dtype=float)
        table = np.asarray(self.cam_blade_angle, dtype=float)
        y, h = np.broadcast_arrays(np.asarray(opening, float), np.asarray(head, float))
        i, ty = _cell(ys, y)
        j, th = _cell(hs, h)
        return ((1 - ty) * (1 - th) * table[i, j] + ty * (1 - th) * table[i + 1, j]
                + (1 - ty) * th * table[i, j + 1] + ty * th * table[i + 1, j + 1])

    def with_cam(self, opening: ArrayLike, head: ArrayLike, blade_angle: ArrayLike) -> Self:
        """A copy with the cam table ``blade_angle[i_opening, i_head]`` [rad] installed."""
        table = np.asarray(blade_angle, dtype=float)
        return replace(self, cam_opening=tuple(np.asarray(opening, float).tolist()),
                       cam_head=tuple(np.asarray(head, float).tolist()),
                       cam_blade_angle=tuple(tuple(row) for row in table.tolist()))


def _cell(axis: NDArray, x: NDArray) -> tuple[NDArray, NDArray]:
    """Lower index and fraction of ``x`` in the ascending ``axis``, clamped to its ends."""
    xc = np.clip(x, axis[0], axis[-1])
    i = np.clip(np.searchsorted(axis, xc, side="right") - 1, 0, axis.size - 2)
    return i, (xc - axis[i]) / (axis[i + 1] - axis[i])


def design_geometry(tip_diameter: float, hub_diameter: float, blade_count: int,
                    guide_vane_height: float, guide_vane_radius: float, *,
                    design_head: float, design_flow: float, speed: float,
                    design_opening: float, hydraulic_efficiency: float,
                    n_stations: int = 5, g: float = G_DEFAULT, **kwargs: float
                    ) -> KaplanGeometry:
    """Free-vortex blade design for one operating point (zero exit swirl), as a geometry.

    At the design point ``Y = eta_h g H``, ``r c_theta1 = Y / omega`` at every radius, the
    outlet leaves without swirl: ``tan(beta2_b) = -U / c_m`` and
    ``tan(beta1_b) = (c_theta1 - U) / c_m`` (shock-free entry); the guide-vane angle at the
    design opening gives that swirl, ``tan(alpha0) = 2 pi b0 (r c_theta) / Q``, and the
    throat law fixes ``alpha0_full`` (Dixon & Hall ch. 9, free-vortex Kaplan design; from
    memory).

    Parameters
    ----------
    design_head : [m]; design_flow : [m3/s]; speed : [rad/s]
    design_opening : fraction at which the design point runs with ``phi = 0``
    hydraulic_efficiency : Y / E assumed at the design point
    kwargs : further :class:`KaplanGeometry` fields (blade range, clearance, ...)
    """
    radii = station_radii(tip_diameter, hub_diameter, n_stations)
    area = math.pi / 4.0 * (tip_diameter ** 2 - hub_diameter ** 2)
    c_m = design_flow / area
    swirl = hydraulic_efficiency * g * design_head / speed  # r c_theta1 [m2/s]
    u = speed * radii
    beta1 = np.arctan((swirl / radii - u) / c_m)
    beta2 = np.arctan(-u / c_m)
    cos_a0 = math.cos(math.atan(2.0 * math.pi * guide_vane_height * swirl / design_flow))
    cos_full = cos_a0 / design_opening
    if not 0.0 < cos_full <= 1.0:
        raise ValueError(f"design opening {design_opening} cannot give the design swirl")
    return KaplanGeometry(tip_diameter, hub_diameter, blade_count, guide_vane_height,
                          guide_vane_radius, math.acos(cos_full),
                          tuple(beta1.tolist()), tuple(beta2.tolist()), **kwargs)


@dataclass
class KaplanTriangles:
    """Blade-element velocity triangles; per-element arrays have the elements last.

    Attributes
    ----------
    radius : [m]; blade_speed : [m/s] U = omega r
    axial_velocity : [m/s] c_m = Q_r / A (uniform)
    guide_vane_meridional : [m/s] c_m0 = Q / (2 pi R0 b0)
    guide_vane_swirl : [m/s] c_theta0 = c_m0 tan(alpha0)
    angular_momentum : [m2/s] r c_theta = R0 c_theta0, kept across the vaneless space
    inlet_swirl : [m/s] c_theta1 = (R0 c_theta0) / r
    inlet_relative_swirl : [m/s] w_theta1 = c_theta1 - U
    inlet_relative_angle : [rad] beta1 = atan(w_theta1 / c_m)
    outlet_swirl : [m/s] c_theta2 = U + c_m tan(beta2)
    work : [J/kg] Y(r) = U (c_theta1 - c_theta2)
    """

    radius: NDArray
    blade_speed: NDArray
    axial_velocity: NDArray
    guide_vane_meridional: NDArray
    guide_vane_swirl: NDArray
    angular_momentum: NDArray
    inlet_swirl: NDArray
    inlet_relative_swirl: NDArray
    inlet_relative_angle: NDArray
    outlet_swirl: NDArray
    work: NDArray

    @property
    def mean_work(self) -> NDArray:
        """[J/kg] mass-averaged Y (plain mean: equal-area elements, uniform c_m)."""
        return self.work.mean(axis=-1)


def kaplan_triangles(flow: ArrayLike, runner_flow: ArrayLike, speed: ArrayLike,
                     guide_vane_angle: ArrayLike, outlet_flow_angle: ArrayLike,
                     radii: ArrayLike, *, annulus_area: float, guide_vane_radius: float,
                     guide_vane_height: float) -> KaplanTriangles:
    """Velocity triangles from the guide vanes through the runner, per blade element.

    Parameters
    ----------
    flow : [m3/s] Q through the guide vanes; runner_flow : [m3/s] Q_r through the blades
    speed : [rad/s]; guide_vane_angle : [rad] alpha0
    outlet_flow_angle : [rad] relative outlet flow angle beta2 per element (``(..., n)``)
    radii : [m] element radii ``(n,)``
    annulus_area : [m2]; guide_vane_radius, guide_vane_height : [m] R0, b0

    Notes
    -----
    Euler turbine equation ``Y = U1 c_theta1 - U2 c_theta2`` and the free vortex
    ``r c_theta = const`` in the vaneless space (Dixon & Hall, ch. 9; from memory).
    """
    q = np.asarray(flow, dtype=float)[..., None]
    qr = np.asarray(runner_flow, dtype=float)[..., None]
    omega = np.asarray(speed, dtype=float)[..., None]
    alpha0 = np.asarray(guide_vane_angle, dtype=float)[..., None]
    r = np.asarray(radii, dtype=float)
    u = omega * r
    c_m = qr / annulus_area
    c_m0 = q / (2.0 * math.pi * guide_vane_radius * guide_vane_height)
    c_theta0 = c_m0 * np.tan(alpha0)
    moment = guide_vane_radius * c_theta0
    c_theta1 = moment / r
    w_theta1 = c_theta1 - u
    c_theta2 = u + c_m * np.tan(outlet_flow_angle)
    shape = np.broadcast_shapes(u.shape, c_theta1.shape, c_theta2.shape)
    full = lambda a: np.broadcast_to(a, shape)  # noqa: E731
    return KaplanTriangles(
        radius=full(r), blade_speed=full(u), axial_velocity=full(c_m),
        guide_vane_meridional=full(c_m0), guide_vane_swirl=full(c_theta0),
        angular_momentum=full(moment), inlet_swirl=full(c_theta1),
        inlet_relative_swirl=full(w_theta1),
        inlet_relative_angle=full(np.arctan2(w_theta1, c_m)),
        outlet_swirl=full(c_theta2), work=full(u * (c_theta1 - c_theta2)))


@dataclass
class KaplanSolution(RunnerSolution):
    """:class:`RunnerSolution` plus the regulating positions used.

    blade_angle : [rad] phi solved at (the cam's, the optimum's or the one given)
    guide_vane_angle : [rad] alpha0 from the opening
    """

    blade_angle: NDArray | None = None
    guide_vane_angle: NDArray | None = None


@dataclass(frozen=True)
class KaplanModel:
    """Kaplan reference model implementing :class:`analytics.runners.base.RunnerModel`.

    Attributes
    ----------
    geometry : KaplanGeometry
    coefficients : loss coefficients by name (see the module docstring); missing names take
        :data:`TYPICAL_COEFFICIENTS`
    blade_grid_points : grid size of the on-cam optimum search (without a cam)
    """

    geometry: KaplanGeometry
    coefficients: Mapping[str, float] = field(
        default_factory=lambda: dict(TYPICAL_COEFFICIENTS))
    blade_grid_points: int = 36
    runner_type: str = "kaplan"

    def __post_init__(self) -> None:
        unknown = set(self.coefficients) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Kaplan coefficient(s) {sorted(unknown)}; "
                           f"known: {list(COEFFICIENT_NAMES)}")
        merged = {**TYPICAL_COEFFICIENTS, **{k: float(v) for k, v in self.coefficients.items()}}
        bad = {k: v for k, v in merged.items() if not (math.isfinite(v) and v >= 0.0)}
        if bad:
            raise ValueError(f"loss coefficients must be finite and >= 0: {bad}")
        object.__setattr__(self, "coefficients", {n: merged[n] for n in COEFFICIENT_NAMES})

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        return COEFFICIENT_NAMES

    def coefficient_bounds(self) -> dict[str, tuple[float, float]]:
        return dict(COEFFICIENT_BOUNDS)

    def with_coefficients(self, values: Mapping[str, float]) -> Self:
        unknown = set(values) - set(COEFFICIENT_NAMES)
        if unknown:
            raise KeyError(f"unknown Kaplan coefficient(s) {sorted(unknown)}")
        return replace(self, coefficients={**self.coefficients, **values})

    def with_geometry(self, geometry: KaplanGeometry) -> Self:
        return replace(self, geometry=geometry)

    # -- solving -------------------------------------------------------------------------

    def solve(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, *,
              blade_angle: ArrayLike | None = None, jets: ArrayLike | None = None,
              rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT) -> KaplanSolution:
        """Solve the operating state (see :meth:`RunnerModel.solve`; ``jets`` is ignored).

        ``blade_angle=None`` is on-cam: the installed cam at (opening, head), or without a
        cam the efficiency-maximising blade angle (:meth:`optimal_blade_angle`). Given
        angles are off-cam operation and are used as they are (not clipped to the range).
        """
        del jets
        if blade_angle is None:
            if self.geometry.has_cam:
                phi = self.geometry.cam_angle(opening, head)
            else:
                return self._optimum(head, speed, opening, rho, g)[1]
        else:
            phi = blade_angle
        return self._solve(head, speed, opening, phi, rho, g)

    def optimal_blade_angle(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, *,
                            rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT) -> NDArray:
        """[rad] blade angle of best efficiency at each (head [m], speed [rad/s], opening),
        within the blade range; ignores an installed cam (this is what a cam should be)."""
        return self._optimum(head, speed, opening, rho, g)[0]

    def with_optimal_cam(self, openings: ArrayLike, heads: ArrayLike, speed: float, *,
                         offset: float = 0.0, rho: float = RHO_DEFAULT,
                         g: float = G_DEFAULT) -> Self:
        """A copy with a cam table from this model's own optimum (plus ``offset`` [rad]).

        Openings at 0 (closed) take the angle of the next opening in the table.
        """
        y = np.asarray(openings, dtype=float)
        h = np.asarray(heads, dtype=float)
        yy, hh = np.meshgrid(y, h, indexing="ij")
        table = self.optimal_blade_angle(hh, speed, np.where(yy > 0, yy, y[y > 0].min()),
                                         rho=rho, g=g) + offset
        return replace(self, geometry=self.geometry.with_cam(y, h, table))

    def _optimum(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike, rho: ArrayLike,
                 g: ArrayLike) -> tuple[NDArray, KaplanSolution]:
        """Blade angle of best efficiency (grid, then golden section) and its solution."""
        geo = self.geometry
        shape = np.broadcast_shapes(*(np.shape(a) for a in (head, speed, opening, rho, g)))
        args = [np.broadcast_to(np.asarray(a, float), shape)[..., None]
                for a in (head, speed, opening, rho, g)]
        grid = np.linspace(geo.blade_angle_min, geo.blade_angle_max, self.blade_grid_points)
        eta = _finite_or_low(self._solve(*args[:3], grid, *args[3:]).efficiency)
        k = np.argmax(eta, axis=-1)
        best_grid = grid[k]
        eta_grid = np.take_along_axis(eta, k[..., None], axis=-1)[..., 0]
        step = grid[1] - grid[0]
        lo = np.maximum(best_grid - step, geo.blade_angle_min)
        hi = np.minimum(best_grid + step, geo.blade_angle_max)
        flat = [a[..., 0] for a in args]

        def efficiency(phi: NDArray) -> NDArray:
            return _finite_or_low(self._solve(flat[0], flat[1], flat[2], phi,
                                              flat[3], flat[4]).efficiency)

        inv_phi = (math.sqrt(5.0) - 1.0) / 2.0
        a, b = lo + (1 - inv_phi) * (hi - lo), lo + inv_phi * (hi - lo)
        fa, fb = efficiency(a), efficiency(b)
        for _ in range(_GOLDEN_STEPS):
            left = fa >= fb  # the maximum lies in [lo, b]
            hi = np.where(left, b, hi)
            lo = np.where(left, lo, a)
            new_a = lo + (1 - inv_phi) * (hi - lo)
            new_b = lo + inv_phi * (hi - lo)
            a_next = np.where(left, new_a, b)
            b_next = np.where(left, a, new_b)
            f_new = efficiency(np.where(left, new_a, new_b))
            fa, fb = np.where(left, f_new, fb), np.where(left, fa, f_new)
            a, b = a_next, b_next
        refined = 0.5 * (lo + hi)
        eta_refined = efficiency(refined)
        phi = np.where(eta_refined >= eta_grid, refined, best_grid)
        return phi, self._solve(flat[0], flat[1], flat[2], phi, flat[3], flat[4])

    def _solve(self, head: ArrayLike, speed: ArrayLike, opening: ArrayLike,
               blade_angle: ArrayLike, rho: ArrayLike, g: ArrayLike) -> KaplanSolution:
        """Solve E = Y + sum(L) for the runner flow at given positions (all broadcast)."""
        geo = self.geometry
        k = self.coefficients
        h, omega, y, phi, rho_, g_ = np.broadcast_arrays(
            *(np.asarray(a, dtype=float) for a in (head, speed, opening, blade_angle, rho, g)))
        e = g_ * h
        closed = y <= 0.0
        alpha0 = geo.guide_vane_angle(np.where(closed, 1.0, y))
        radii = geo.radii
        area = geo.annulus_area
        x = phi[..., None]
        beta1_b = np.asarray(geo.blade_inlet_angle_design) + x
        beta2 = np.asarray(geo.blade_outlet_angle_design) + x + geo.outlet_deviation
        # a blade section turned past the tangential direction has no physical flow state
        physical = np.all((np.abs(beta1_b) < math.pi / 2) & (np.abs(beta2) < math.pi / 2),
                          axis=-1)
        tan_beta1_b = np.tan(beta1_b)
        tan_beta2 = np.tan(beta2)
        with np.errstate(invalid="ignore"):
            root_2e = np.sqrt(2.0 * e)
        q_leak = np.where(closed, 0.0,
                          k["tip_leakage"] * math.pi * geo.tip_diameter * geo.tip_clearance
                          * root_2e)

        def state(q_r: NDArray) -> tuple[KaplanTriangles, dict[str, NDArray]]:
            tri = kaplan_triangles(q_r + q_leak, q_r, omega, alpha0, beta2, radii,
                                   annulus_area=area, guide_vane_radius=geo.guide_vane_radius,
                                   guide_vane_height=geo.guide_vane_height)
            c_m = tri.axial_velocity
            specific = {
                "incidence": 0.5 * k["incidence"]
                * ((tri.inlet_relative_swirl - c_m * tan_beta1_b) ** 2).mean(axis=-1),
                "passage_friction": 0.5 * k["passage_friction"] * ((q_r + q_leak) / area) ** 2,
                "blade_friction": 0.5 * k["blade_friction"]
                * (c_m ** 2 + (c_m * tan_beta2) ** 2).mean(axis=-1),
                "outlet_axial": 0.5 * k["outlet_axial"] * c_m[..., 0] ** 2,
                "outlet_swirl": 0.5 * k["outlet_swirl"] * (tri.outlet_swirl ** 2).mean(axis=-1),
            }
            return tri, specific

        def residual(q_r: NDArray) -> NDArray:
            tri, specific = state(q_r)
            return tri.mean_work + sum(specific.values()) - e

        upper = area * 10.0 * np.where(np.isfinite(root_2e), root_2e, np.nan)
        q_r, ok = bisect_vectorised(residual, np.zeros_like(e), upper)
        ok = ok & ~closed & (e > 0) & physical
        q_r = np.where(closed, 0.0, np.where(ok, q_r, np.nan))
        tri, specific = state(q_r)
        q = q_r + q_leak
        work = np.where(closed, 0.0, tri.mean_work)
        losses = {name: np.where(closed, 0.0, rho_ * q_r * value)
                  for name, value in specific.items()}
        losses["tip_leakage"] = rho_ * q_leak * e
        losses["disc_friction"] = (k["disc_friction"] * rho_ * omega ** 3
                                   * (geo.hub_diameter / 2.0) ** 5)
        losses["bearing"] = k["bearing"] * omega ** 2
        p_h = rho_ * q * e
        shaft = rho_ * q_r * work - losses["disc_friction"] - losses["bearing"]
        with np.errstate(invalid="ignore", divide="ignore"):
            eta = np.where(q > 0.0, shaft / p_h, np.nan)
        losses = {n: losses[n] for n in COEFFICIENT_NAMES}
        return KaplanSolution(head=h, specific_energy=e, flow=q, runner_flow=q_r,
                              runner_work=work, hydraulic_power=p_h, shaft_power=shaft,
                              efficiency=eta, losses=losses, converged=ok | closed,
                              blade_angle=phi, guide_vane_angle=np.where(closed, math.pi / 2,
                                                                         alpha0))


def _finite_or_low(values: NDArray) -> NDArray:
    return np.where(np.isfinite(values), values, -np.inf)


#: [rad/s] synchronous speed of the fictional demo unit, 112.5 rpm.
DEMO_SPEED = 112.5 * 2.0 * math.pi / 60.0


def demo_geometry() -> KaplanGeometry:
    """Geometry of the fictional demo unit (not a real plant): tip 6.10 m, hub 2.50 m,
    5 blades, b0 2.40 m, R0 4.00 m, 112.5 rpm, 18 m rated net head, about 190 m3/s and
    30 MW rated; free-vortex design at 200 m3/s, 18 m and 90 % opening, tip gap 4 mm."""
    return design_geometry(6.10, 2.50, 5, 2.40, 4.00, design_head=18.0, design_flow=200.0,
                           speed=DEMO_SPEED, design_opening=0.90, hydraulic_efficiency=0.935,
                           tip_clearance=0.004)


def demo_model() -> KaplanModel:
    """The fictional demo unit with :data:`TYPICAL_COEFFICIENTS` and no installed cam."""
    return KaplanModel(demo_geometry())
