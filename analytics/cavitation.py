"""Cavitation: plant Thoma sigma, critical sigma, margin, runner-outlet pressure, exposure.

Pure, vectorised functions in SI (m, s, kg, Pa, K, m3/s). All-scalar inputs give a float,
anything else a numpy array (broadcast together); NaN in, NaN out.

Conventions
-----------
- Levels and elevations are positive upwards from one datum (the plant file's).
- The setting (suction height) ``H_s = z_ref - z_tw`` is the runner reference elevation
  above tailwater: POSITIVE when the runner sits above tailwater, negative when submerged.
- Plant sigma (Thoma number), classical form (domain.md §5; IEC 60193)::

      sigma_p = (p_atm/(rho g) - p_v/(rho g) - H_s) / H  =  NPSH / H

  Rising tailwater lowers ``H_s`` and raises sigma; warmer water raises ``p_v`` and lowers
  it; a higher plant has a lower ``p_atm`` and a lower sigma.
- The sigma margin is the RATIO ``sigma_p / sigma_c`` (common practice): above 1 the plant
  runs with more suction head than the critical sigma asks for.
- Critical sigma comes first from the unit's own reference data (a sigma curve against flow
  or load, :func:`critical_sigma_from_curve`); only lacking that from a published
  correlation against specific speed (:func:`critical_sigma_correlation`). Plant sigma and
  critical sigma must refer to the same reference elevation and the same definition (with or
  without the outlet velocity head, see :func:`thoma_terms`).

Caution
-------
These numbers advise inspection planning; they never command a unit. A low margin or a
runner-outlet pressure near vapour pressure calls for inspection by qualified staff;
operating limits, protection settings, local codes and licensed practice prevail. A mean
outlet pressure above vapour pressure does NOT mean the runner is free of cavitation: the
blade suction sides run far below the section mean, which is what the critical sigma of a
model test captures.

References
----------
IEC 60193:1999, Hydraulic turbines, storage pumps and pump-turbines - Model acceptance
tests (cavitation number sigma = NPSE/E; from memory).
D. Thoma (1920s), the cavitation coefficient named after him, as presented in the
hydraulic-machines textbooks cited in each function.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt
import pandas as pd

from analytics.runners.base import G_DEFAULT, RHO_DEFAULT
from analytics.site import atmospheric_pressure
from analytics.water import density, vapour_pressure

ArrayLike = float | npt.NDArray[np.float64]
NDArray = npt.NDArray[np.float64]

#: Seconds per hour (SI Brochure, 9th ed., table 8).
SECONDS_PER_HOUR = 3600.0
#: kW per W, for the customary power specific speed n_s (rpm, kW, m).
KW_PER_W = 1e-3
SECONDS_PER_MINUTE = 60.0

#: Turbine efficiency assumed at the best-efficiency point when a flow-based n_q is turned
#: into the power-based n_s of the correlations (common practice for the conversion; sigma
#: from the Moody-type form scales with this efficiency to the first power).
DEFAULT_BEP_EFFICIENCY = 0.92

#: Moody-type critical sigma against the metric power specific speed n_s [rpm, kW, m]
#: (380.78 is n_s = 100 in US units, rpm-hp-ft, expressed in rpm-kW-m):
#: Francis sigma_c = 0.625 (n_s / 380.78)^2; Kaplan and propeller
#: sigma_c = 0.28 + (n_s / 380.78)^3 / 7.5.
MOODY_NS_REF = 380.78
MOODY_FRANCIS = 0.625
MOODY_KAPLAN_BASE = 0.28
MOODY_KAPLAN_DIVISOR = 7.5

#: de Siervo & de Leva statistical correlations in the IEC specific speed n_QE (as given in
#: the ESHA 2004 guide, from memory): Francis 1.2715 n_QE^1.41, Kaplan 1.5241 n_QE^1.46.
DE_SIERVO = {"francis": (1.2715, 1.41), "kaplan": (1.5241, 1.46)}

CorrelationMethod = Literal["moody", "de_siervo"]


def _out(value: npt.ArrayLike) -> ArrayLike:
    return float(value) if np.ndim(value) == 0 else np.asarray(value, dtype=np.float64)


def _f(value: npt.ArrayLike) -> NDArray:
    return np.asarray(value, dtype=np.float64)


# --- plant sigma -------------------------------------------------------------------------

@dataclass(frozen=True)
class ThomaTerms:
    """The terms of the plant Thoma number, each as a head of water [m] (sigma: [-]).

    Attributes
    ----------
    atmospheric_head : p_atm / (rho g) [m]
    vapour_head : p_v / (rho g) [m]
    setting : H_s, runner reference elevation above tailwater [m] (negative: submerged)
    velocity_head : v_out^2 / (2 g) at the draft-tube outlet [m]; 0 in the classical form
    suction_head : NPSH = atmospheric_head - vapour_head - setting + velocity_head [m]
    sigma : NPSH / H, dimensionless (NaN where H <= 0)
    """

    atmospheric_head: ArrayLike
    vapour_head: ArrayLike
    setting: ArrayLike
    velocity_head: ArrayLike
    suction_head: ArrayLike
    sigma: ArrayLike


def thoma_terms(net_head: ArrayLike, atmospheric_pressure_: ArrayLike,
                vapour_pressure_: ArrayLike, setting: ArrayLike, *,
                rho: ArrayLike = RHO_DEFAULT, g: ArrayLike = G_DEFAULT,
                outlet_velocity: ArrayLike = 0.0) -> ThomaTerms:
    """Thoma cavitation number from pressures and the setting, term by term.

    Parameters
    ----------
    net_head : [m] net head H
    atmospheric_pressure_ : [Pa] absolute air pressure over the tailwater
    vapour_pressure_ : [Pa] vapour pressure of the water
    setting : [m] H_s, runner reference elevation above tailwater (negative: submerged)
    rho : [kg/m3] water density
    g : [m/s2] local gravity
    outlet_velocity : [m/s] mean velocity at the draft-tube outlet (low-pressure section).
        0 (default) gives the classical Thoma form of the textbooks and of domain.md §5.
        With it, NPSH gains ``v^2 / 2g``, the IEC 60193 form ``NPSE / E`` (from memory),
        which is how model-test sigma curves are defined.

    Returns
    -------
    ThomaTerms

    Notes
    -----
    ``sigma = (p_atm/(rho g) - p_v/(rho g) - H_s + v_out^2/(2 g)) / H``.

    References
    ----------
    IEC 60193:1999 (NPSE and sigma, from memory); R. L. Daugherty, J. B. Franzini and
    E. J. Finnemore, Fluid Mechanics with Engineering Applications, chapter on reaction
    turbines (Thoma sigma ``(p_atm - p_v)/gamma - z`` over the head).
    """
    h, p_a, p_v, h_s, v, rho_, g_ = np.broadcast_arrays(
        *(_f(a) for a in (net_head, atmospheric_pressure_, vapour_pressure_, setting,
                          outlet_velocity, rho, g)))
    atm = p_a / (rho_ * g_)
    vap = p_v / (rho_ * g_)
    vel = v**2 / (2.0 * g_)
    npsh = atm - vap - h_s + vel
    with np.errstate(divide="ignore", invalid="ignore"):
        sigma = np.where(h > 0.0, npsh / h, np.nan)
    return ThomaTerms(atmospheric_head=_out(atm), vapour_head=_out(vap), setting=_out(h_s),
                      velocity_head=_out(vel), suction_head=_out(npsh), sigma=_out(sigma))


def plant_sigma_terms(net_head: ArrayLike, tailwater_level: ArrayLike,
                      runner_reference_elevation: ArrayLike, water_temperature: ArrayLike,
                      plant_elevation: ArrayLike, *, rho: ArrayLike | None = None,
                      g: ArrayLike = G_DEFAULT, p_atm: ArrayLike | None = None,
                      outlet_velocity: ArrayLike = 0.0) -> ThomaTerms:
    """Plant Thoma number from the plant's levels, elevation and water temperature.

    Parameters
    ----------
    net_head : [m] net head H
    tailwater_level : [m] tailwater elevation (same datum as the runner reference)
    runner_reference_elevation : [m] the unit's sigma reference elevation (plant file)
    water_temperature : [K]
    plant_elevation : [m] above sea level, for the standard-atmosphere pressure
    rho : [kg/m3] water density; default IAPWS-IF97 at the water temperature and p_atm
    g : [m/s2] local gravity
    p_atm : [Pa] measured barometric pressure, if the plant has one; default the ISO 2533
        standard atmosphere at ``plant_elevation`` (the weather moves the real value by a
        few per cent, about 0.3 m of head)
    outlet_velocity : [m/s] draft-tube outlet velocity for the IEC 60193 form (default 0,
        the classical form); see :func:`thoma_terms`

    Returns
    -------
    ThomaTerms

    References
    ----------
    Domain primer §5; IEC 60193:1999 (from memory); ISO 2533:1975
    (:func:`analytics.site.atmospheric_pressure`); IAPWS-IF97 regions 1 and 4
    (:func:`analytics.water.density`, :func:`analytics.water.vapour_pressure`).
    """
    pressure = atmospheric_pressure(plant_elevation) if p_atm is None else p_atm
    p_v = vapour_pressure(water_temperature)
    if rho is None:
        rho = density(water_temperature, pressure)
    setting = _f(runner_reference_elevation) - _f(tailwater_level)
    return thoma_terms(net_head, pressure, p_v, setting, rho=rho, g=g,
                       outlet_velocity=outlet_velocity)


def plant_sigma(net_head: ArrayLike, tailwater_level: ArrayLike,
                runner_reference_elevation: ArrayLike, water_temperature: ArrayLike,
                plant_elevation: ArrayLike, *, rho: ArrayLike | None = None,
                g: ArrayLike = G_DEFAULT, p_atm: ArrayLike | None = None,
                outlet_velocity: ArrayLike = 0.0) -> ArrayLike:
    """Plant Thoma number sigma_p [-]; the ``sigma`` of :func:`plant_sigma_terms`.

    ``sigma_p = (p_atm/(rho g) - p_v/(rho g) - H_s) / H``, ``H_s = z_ref - z_tw``.
    Same parameters as :func:`plant_sigma_terms`. A sigma below the unit's critical sigma
    calls for inspection by qualified staff; local codes and licensed practice prevail.
    """
    return plant_sigma_terms(net_head, tailwater_level, runner_reference_elevation,
                             water_temperature, plant_elevation, rho=rho, g=g, p_atm=p_atm,
                             outlet_velocity=outlet_velocity).sigma


# --- critical sigma ----------------------------------------------------------------------

def critical_sigma_from_curve(x: ArrayLike, curve_x: npt.ArrayLike,
                              curve_sigma: npt.ArrayLike) -> ArrayLike:
    """Critical sigma interpolated on the unit's own sigma curve.

    Parameters
    ----------
    x : operating point in the curve's abscissa: flow [m3/s], or flow or load as a fraction
        of rated (whatever the reference data uses; the caller passes the same quantity)
    curve_x : strictly increasing abscissae of the curve (at least two points)
    curve_sigma : critical sigma at each abscissa [-]

    Returns
    -------
    float or array [-]
        Linear interpolation; NaN outside ``[curve_x[0], curve_x[-1]]`` (no extrapolation)
        and where ``x`` is NaN.

    Notes
    -----
    The curve is typically the sigma of a model test at one head (IEC 60193), e.g. the
    sigma at which efficiency has dropped by 1 % or incipient cavitation, stepped to the
    prototype reference level. Which of these the curve holds decides how the margin
    reads; the plant file should say.
    """
    cx = _f(curve_x)
    cs = _f(curve_sigma)
    if cx.ndim != 1 or cx.shape != cs.shape or cx.size < 2:
        raise ValueError("critical_sigma_from_curve: curve_x and curve_sigma must be 1-D "
                         "of the same length, at least two points")
    if not np.all(np.isfinite(cx)) or not np.all(np.isfinite(cs)):
        raise ValueError("critical_sigma_from_curve: the curve must be finite")
    if np.any(np.diff(cx) <= 0.0):
        raise ValueError("critical_sigma_from_curve: curve_x must be strictly increasing")
    xv = _f(x)
    sigma = np.interp(xv, cx, cs)
    inside = (xv >= cx[0]) & (xv <= cx[-1])
    return _out(np.where(inside, sigma, np.nan))


def specific_speed_ns_from_nq(specific_speed_nq: ArrayLike, *,
                              efficiency: ArrayLike = DEFAULT_BEP_EFFICIENCY,
                              rho: ArrayLike = RHO_DEFAULT,
                              g: ArrayLike = G_DEFAULT) -> ArrayLike:
    """Power specific speed n_s [rpm, kW, m] from the flow specific speed n_q.

    ``n_s = n P[kW]^0.5 / H^1.25`` with ``P = eta rho g Q H``, so
    ``n_s = n_q sqrt(eta rho g / 1000)`` (n_q = n[rpm] Q^0.5 / H^0.75).

    Parameters
    ----------
    specific_speed_nq : [rpm m^0.75 s^-0.5]
    efficiency : turbine efficiency at the point (BEP), fraction
    rho : [kg/m3]
    g : [m/s2]

    Returns
    -------
    float or array [rpm kW^0.5 m^-1.25]

    References
    ----------
    Definitions as in :mod:`analytics.similarity` (Dixon and Hall, specific speed).
    """
    factor = np.sqrt(_f(efficiency) * _f(rho) * _f(g) * KW_PER_W)
    return _out(_f(specific_speed_nq) * factor)


def critical_sigma_correlation(specific_speed_nq: ArrayLike, runner_type: str, *,
                               method: CorrelationMethod = "moody",
                               efficiency: ArrayLike = DEFAULT_BEP_EFFICIENCY,
                               g: ArrayLike = G_DEFAULT) -> ArrayLike:
    """Critical (setting) sigma from a published correlation against specific speed.

    A FALLBACK for units without a sigma curve of their own: the correlations are fits to
    the settings of installed machines of past decades, not this runner's model test, and
    scatter widely around them. Use the result to flag for inspection, never to set limits.

    Parameters
    ----------
    specific_speed_nq : [rpm m^0.75 s^-0.5] n_q = n[rpm] Q^0.5 / H^0.75 at the BEP
    runner_type : "francis", "kaplan" (also for propeller and bulb units) or "pelton"
        (an impulse runner has no Thoma sigma: NaN)
    method : "moody" (default) or "de_siervo"
    efficiency : BEP efficiency for the n_q -> n_s conversion ("moody" only), fraction
    g : [m/s2] for the n_q -> n_QE conversion ("de_siervo") and n_s

    Returns
    -------
    float or array, critical sigma [-] (classical form, no outlet velocity head)

    Notes
    -----
    ``"moody"``: with the metric power specific speed ``n_s = n[rpm] P[kW]^0.5 / H^1.25``,
    Francis ``sigma_c = 0.625 (n_s / 380.78)^2``; Kaplan and propeller
    ``sigma_c = 0.28 + (n_s / 380.78)^3 / 7.5``. 380.78 is n_s = 100 of the US customary
    unit (rpm, hp, ft), so in US units the Francis form reads ``0.625 (n_s/100)^2``.
    ``n_s`` comes from ``n_q`` by :func:`specific_speed_ns_from_nq` with ``efficiency``.
    The Francis form is the one of the textbook problems checked in the tests; the Kaplan
    form and the attribution to Moody are from memory.

    ``"de_siervo"``: with the IEC specific speed ``n_QE = n[rev/s] Q^0.5 / E^0.75
    = n_q / (60 g^0.75)``, Francis ``sigma = 1.2715 n_QE^1.41`` and Kaplan
    ``sigma = 1.5241 n_QE^1.46``. The guide writes both plus ``V^2 / 2gH`` (the outlet
    velocity head), which its setting equation takes off again; without it the values
    compare with the classical plant sigma. In the metric n_s these are
    ``7.54e-5 n_s^1.41`` and ``6.40e-5 n_s^1.46`` (n_s about 995 n_QE). From memory.

    References
    ----------
    "moody": L. F. Moody's sigma-specific speed relations (attribution from memory) as used
    in hydraulic-machines textbooks: the Francis form appears in a textbook problem quoted
    with its answer at https://askfilo.com (13,240 kW, 150 rpm, 27 m: draft tube 2.22 m),
    and its US form gives the sigma_c = 0.31 at n_s = 70 of R. L. Daugherty, J. B. Franzini
    and E. J. Finnemore, Fluid Mechanics with Engineering Applications, Example 16.3.
    "de_siervo": F. de Siervo and F. de Leva, "Modern trends in selecting and designing
    Francis turbines", Water Power & Dam Construction, Aug. 1976, and "... Kaplan
    turbines", Dec. 1977; as given in ESHA, Guide on How to Develop a Small Hydropower
    Plant (2004), ch. 6 (coefficients from memory).
    """
    kind = runner_type.lower()
    if kind not in ("francis", "kaplan", "pelton"):
        raise ValueError(f"critical_sigma_correlation: unknown runner type {runner_type!r}")
    if method not in ("moody", "de_siervo"):
        raise ValueError(f"critical_sigma_correlation: unknown method {method!r}")
    nq = _f(specific_speed_nq)
    nq = np.where(nq > 0.0, nq, np.nan)
    if kind == "pelton":
        return _out(np.full_like(nq, np.nan))
    if method == "moody":
        ratio = _f(specific_speed_ns_from_nq(nq, efficiency=efficiency, g=g)) / MOODY_NS_REF
        if kind == "francis":
            return _out(MOODY_FRANCIS * ratio**2)
        return _out(MOODY_KAPLAN_BASE + ratio**3 / MOODY_KAPLAN_DIVISOR)
    n_qe = nq / (SECONDS_PER_MINUTE * _f(g) ** 0.75)
    coefficient, exponent = DE_SIERVO[kind]
    return _out(coefficient * n_qe**exponent)


# --- margin and state ----------------------------------------------------------------------

def sigma_margin(sigma_plant: ArrayLike, sigma_critical: ArrayLike) -> ArrayLike:
    """Sigma margin as the RATIO ``sigma_p / sigma_c`` [-] (common practice).

    Above 1: more suction head than the critical sigma asks for; below 1: less. NaN where
    the critical sigma is not positive or either input is NaN. A margin below the unit's
    required ratio calls for inspection by qualified staff; local codes and licensed
    practice prevail.
    """
    sp = _f(sigma_plant)
    sc = _f(sigma_critical)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _out(np.where(sc > 0.0, sp / sc, np.nan))


@dataclass(frozen=True)
class CavitationState:
    """Per window (or sample): plant and critical sigma, margin, and the below-margin flag.

    Attributes
    ----------
    sigma_plant : [-]
    sigma_critical : [-]
    margin : sigma_plant / sigma_critical [-] (NaN where unknown)
    required_ratio : the margin below which a window counts as below margin
    below_margin : bool, margin < required_ratio; False where the margin is unknown (NaN),
        so unknown windows add no exposure
    """

    sigma_plant: NDArray
    sigma_critical: NDArray
    margin: NDArray
    required_ratio: float
    below_margin: npt.NDArray[np.bool_]

    def to_frame(self) -> pd.DataFrame:
        """Columns sigma_plant, sigma_critical, sigma_margin, below_margin (1-D state)."""
        return pd.DataFrame({
            "sigma_plant": np.atleast_1d(self.sigma_plant),
            "sigma_critical": np.atleast_1d(self.sigma_critical),
            "sigma_margin": np.atleast_1d(self.margin),
            "below_margin": np.atleast_1d(self.below_margin),
        })


def cavitation_state(sigma_plant: ArrayLike, sigma_critical: ArrayLike, *,
                     required_ratio: float = 1.0) -> CavitationState:
    """Margin and below-margin flag from plant and critical sigma.

    Parameters
    ----------
    sigma_plant : [-] plant sigma, :func:`plant_sigma`
    sigma_critical : [-] from :func:`critical_sigma_from_curve` or, lacking a curve,
        :func:`critical_sigma_correlation`
    required_ratio : margin (ratio) the unit must keep; default 1.0, i.e. at the critical
        sigma itself. Owners usually ask for more than 1 against a model-test sigma; set it
        per unit from the supplier's guarantee or the owner's practice.

    Returns
    -------
    CavitationState

    A below-margin flag calls for inspection by qualified staff; it is advice, never a
    command to the unit. Operating limits, local codes and licensed practice prevail.
    """
    if not (np.isfinite(required_ratio) and required_ratio > 0.0):
        raise ValueError(f"cavitation_state: required_ratio must be > 0, got {required_ratio}")
    sp, sc = np.broadcast_arrays(_f(sigma_plant), _f(sigma_critical))
    margin = _f(sigma_margin(sp, sc))
    below = np.isfinite(margin) & (margin < required_ratio)
    return CavitationState(sigma_plant=sp.copy(), sigma_critical=sc.copy(), margin=margin,
                           required_ratio=float(required_ratio), below_margin=below)


# --- runner-outlet pressure ------------------------------------------------------------------

def draft_tube_recovery(inlet_velocity: ArrayLike, outlet_velocity: ArrayLike,
                        loss_head: ArrayLike, g: ArrayLike = G_DEFAULT) -> ArrayLike:
    """Draft-tube efficiency (pressure recovery) from velocities and the loss in the tube.

    ``eta_d = (v_2^2/2g - v_out^2/2g - h_L) / (v_2^2/2g)``: the static head the tube
    recovers, over the velocity head entering it. This is the ``recovery`` of
    :func:`runner_outlet_pressure`.

    Parameters
    ----------
    inlet_velocity : [m/s] mean velocity at the draft-tube inlet (runner outlet)
    outlet_velocity : [m/s] mean velocity at the draft-tube outlet
    loss_head : [m] head lost by friction and separation inside the tube
    g : [m/s2]

    Returns
    -------
    float or array, fraction (NaN where the inlet velocity is 0)

    References
    ----------
    Definition of the draft-tube efficiency in hydraulic-machines textbooks, e.g. S. Kumar,
    Fluid Systems, ch. 5 (Francis turbine), Example 5.15 as coded in the FOSSEE Scilab
    Textbook Companion; R. K. Bansal, Fluid Mechanics and Hydraulic Machines, chapter on
    reaction turbines (from memory).
    """
    v2 = _f(inlet_velocity) ** 2
    vo = _f(outlet_velocity) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        eta = np.where(v2 > 0.0, (v2 - vo - 2.0 * _f(g) * _f(loss_head)) / v2, np.nan)
    return _out(eta)


def runner_outlet_pressure(tailwater_level: ArrayLike, runner_reference_elevation: ArrayLike,
                           flow: ArrayLike, outlet_area: ArrayLike,
                           draft_tube_outlet_area: ArrayLike | None, recovery: ArrayLike,
                           plant_elevation: ArrayLike, rho: ArrayLike = RHO_DEFAULT,
                           g: ArrayLike = G_DEFAULT, *,
                           p_atm: ArrayLike | None = None) -> ArrayLike:
    """Absolute static pressure at the runner outlet (draft-tube inlet) [Pa].

    Derivation (energy balance over the draft tube, section 2 = runner outlet at elevation
    ``z_2``, section 3 = draft-tube outlet at ``z_3``, submerged)::

        p_2/(rho g) + v_2^2/(2g) + z_2 = p_3/(rho g) + v_3^2/(2g) + z_3 + h_L
        p_3 = p_atm + rho g (z_tw - z_3)            (hydrostatic under the tailwater)
        =>  p_2 = p_atm + rho g (z_tw - z_2) - rho (v_2^2 - v_3^2)/2 + rho g h_L

    With the draft-tube efficiency ``eta_d = (v_2^2/2g - v_3^2/2g - h_L) / (v_2^2/2g)``
    (:func:`draft_tube_recovery`) the loss and the outlet velocity fold into one factor::

        p_2 = p_atm - rho g H_s - eta_d rho v_2^2 / 2,     H_s = z_2 - z_tw,  v_2 = Q / A_2

    The better the tube recovers the outlet velocity head, the deeper the vacuum under the
    runner: that is what lets a draft tube regain head, and what brings the runner outlet
    towards vapour pressure. Against the plant sigma of the same setting (classical form),
    ``p_2 - p_v = rho g sigma_p H - eta_d rho v_2^2 / 2``.

    Parameters
    ----------
    tailwater_level : [m]
    runner_reference_elevation : [m] elevation z_2 of the runner-outlet section (the unit's
        reference elevation; pass the outlet section's own if it differs)
    flow : [m3/s] flow through the runner
    outlet_area : [m2] runner-outlet (draft-tube inlet) section A_2
    draft_tube_outlet_area : [m2] draft-tube outlet A_3, or None. When given, a recovery
        above the ideal ``1 - (A_2/A_3)^2`` (a loss-free tube) is impossible and gives NaN.
    recovery : draft-tube efficiency eta_d, fraction 0..1
    plant_elevation : [m] for the ISO 2533 standard-atmosphere pressure
    rho : [kg/m3]
    g : [m/s2]
    p_atm : [Pa] measured barometric pressure; default the standard atmosphere

    Returns
    -------
    float or array [Pa] absolute

    Notes
    -----
    Mean (one-dimensional) section values: swirl and the non-uniform velocity profile
    leaving a runner off its design point lower the local pressure further. Compare with
    vapour pressure by :func:`outlet_pressure_margin`; a margin near zero calls for
    inspection by qualified staff, and local codes and licensed practice prevail.

    References
    ----------
    Bernoulli equation with loss over the draft tube as in S. Kumar, Fluid Systems,
    Example 5.15 (FOSSEE Scilab Textbook Companion) and the codecogs engineering library,
    "Pump and turbine cavitation"; draft-tube efficiency as in :func:`draft_tube_recovery`.
    """
    pressure = _f(atmospheric_pressure(plant_elevation) if p_atm is None else p_atm)
    a2 = _f(outlet_area)
    eta_d = _f(recovery)
    with np.errstate(divide="ignore", invalid="ignore"):
        v2 = np.where(a2 > 0.0, _f(flow) / a2, np.nan)
        valid = (eta_d >= 0.0) & (eta_d <= 1.0)
        if draft_tube_outlet_area is not None:
            a3 = _f(draft_tube_outlet_area)
            ideal = np.where(a3 > 0.0, 1.0 - (a2 / a3) ** 2, np.nan)
            valid &= eta_d <= ideal
    rho_ = _f(rho)
    setting = _f(runner_reference_elevation) - _f(tailwater_level)
    p2 = pressure - rho_ * _f(g) * setting - eta_d * rho_ * v2**2 / 2.0
    return _out(np.where(valid, p2, np.nan))


def outlet_pressure_margin(outlet_pressure: ArrayLike,
                           water_temperature: ArrayLike) -> ArrayLike:
    """``p_2 - p_v`` [Pa]: runner-outlet static pressure above the vapour pressure.

    Parameters
    ----------
    outlet_pressure : [Pa] absolute, from :func:`runner_outlet_pressure`
    water_temperature : [K] (IAPWS-IF97 vapour pressure)

    Returns
    -------
    float or array [Pa]; negative means the mean outlet pressure is below vapour pressure.

    A positive margin is necessary, not sufficient: blade surfaces run far below the
    section mean. Low or negative margins call for inspection by qualified staff.
    """
    return _out(_f(outlet_pressure) - _f(vapour_pressure(water_temperature)))


# --- exposure --------------------------------------------------------------------------------

@dataclass(frozen=True)
class CavitationExposure:
    """Cavitation exposure for inspection planning.

    Attributes
    ----------
    windows : one row per window, sorted by (unit, window_start): window_start,
        duration_s [s], below_margin, load_fraction, hours_below [h],
        weighted_hours_below [h] (hours x load fraction), cumulative_hours_below [h],
        cumulative_weighted_hours_below [h] (running totals per unit); a ``unit`` column
        first when units were given
    totals : one row per unit (one row in all without units): windows_below,
        hours_below [h], weighted_hours_below [h]
    """

    windows: pd.DataFrame
    totals: pd.DataFrame


def cavitation_exposure(window_start: npt.ArrayLike, duration_s: npt.ArrayLike,
                        below_margin: npt.ArrayLike, load_fraction: npt.ArrayLike, *,
                        unit: npt.ArrayLike | None = None) -> CavitationExposure:
    """Cumulative hours below the sigma margin, plain and load-weighted, per unit.

    ``hours_below = sum(duration_s) / 3600`` over windows below margin;
    ``weighted_hours_below = sum(duration_s * load_fraction) / 3600`` over the same windows.

    Parameters
    ----------
    window_start : window start times (int64 UTC epoch seconds or datetime64); only sorted
    duration_s : [s] window durations, >= 0
    below_margin : bool per window (:attr:`CavitationState.below_margin`); NaN reads False
    load_fraction : generator power over rated power per window, fraction; negative values
        (motoring) weigh 0; above 1 (overload) weigh more
    unit : optional unit key per window; running totals restart for each unit

    Returns
    -------
    CavitationExposure

    Notes
    -----
    Erosion grows with time spent below margin and with load (more flow through a
    cavitating runner), hence the load weighting (common practice). A window below margin
    with a NaN duration shows NaN hours and adds nothing; one with a NaN load counts in the
    hours, but its weighted hours are NaN and add nothing to the weighted running and total
    columns. The exposure points inspection at the units that need it first; the
    inspection itself is for qualified staff.
    """
    start = np.asarray(window_start)
    dur = _f(duration_s)
    load = _f(load_fraction)
    flag = np.asarray(below_margin)
    if flag.dtype.kind == "f":
        flag = np.where(np.isnan(flag), False, flag != 0.0)
    flag = flag.astype(bool)
    n = start.shape[0] if start.ndim == 1 else -1
    arrays = [dur, load, flag] + ([np.asarray(unit)] if unit is not None else [])
    if n < 0 or any(a.ndim != 1 or a.shape[0] != n for a in arrays):
        raise ValueError("cavitation_exposure: inputs must be 1-D arrays of one length")
    if np.any(dur < 0.0):
        raise ValueError("cavitation_exposure: duration_s must be >= 0")
    frame = pd.DataFrame({"window_start": start, "duration_s": dur, "below_margin": flag,
                          "load_fraction": load})
    keys = ["window_start"]
    if unit is not None:
        frame.insert(0, "unit", np.asarray(unit))
        keys = ["unit", "window_start"]
    frame = frame.sort_values(keys, kind="mergesort").reset_index(drop=True)
    hours = np.where(frame["below_margin"], frame["duration_s"] / SECONDS_PER_HOUR, 0.0)
    weight = np.clip(frame["load_fraction"].to_numpy(), 0.0, None)
    weighted = np.where(frame["below_margin"], hours * weight, 0.0)
    frame["hours_below"] = hours
    frame["weighted_hours_below"] = weighted
    add_hours = np.nan_to_num(hours, nan=0.0)
    add_weighted = np.nan_to_num(weighted, nan=0.0)
    frame["_counted"] = frame["below_margin"] & np.isfinite(hours)
    if unit is not None:
        grouped = pd.DataFrame({"unit": frame["unit"], "h": add_hours, "w": add_weighted,
                                "c": frame["_counted"]}).groupby("unit", sort=True)
        frame["cumulative_hours_below"] = grouped["h"].cumsum().to_numpy()
        frame["cumulative_weighted_hours_below"] = grouped["w"].cumsum().to_numpy()
        totals = pd.DataFrame({
            "windows_below": grouped["c"].sum().astype(np.int64),
            "hours_below": grouped["h"].sum(),
            "weighted_hours_below": grouped["w"].sum(),
        }).reset_index()
    else:
        frame["cumulative_hours_below"] = np.cumsum(add_hours)
        frame["cumulative_weighted_hours_below"] = np.cumsum(add_weighted)
        totals = pd.DataFrame({
            "windows_below": [int(frame["_counted"].sum())],
            "hours_below": [float(add_hours.sum())],
            "weighted_hours_below": [float(add_weighted.sum())],
        })
    return CavitationExposure(windows=frame.drop(columns="_counted"), totals=totals)
