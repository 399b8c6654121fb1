"""Hydraulic similarity: unit quantities, specific speed, affinity laws and efficiency step-up.

Inputs are SI (speed in rad/s, flow in m3/s, power in W, head in m, specific hydraulic
energy ``E = g H`` in J/kg, diameter in m); all functions broadcast over numpy arrays. The
classical (customary) quantities keep the units they are published in, converted here and
named in each docstring:

=====================  ==============================  =====================================
quantity               definition                      unit of the result
=====================  ==============================  =====================================
``n11``                n[rpm] D / sqrt(H)              rpm m^0.5
``q11``                Q / (D^2 sqrt(H))               m^0.5/s
``p11``                P[kW] / (D^2 H^1.5)             kW m^-3.5
``n_ED``, ``Q_ED``     IEC 60193 factors, n in rev/s   dimensionless
``P_ED``               P / (rho D^2 E^1.5)             dimensionless
``n_q``                n[rpm] Q^0.5 / H^0.75           rpm m^0.75 s^-0.5 (flow-based)
``n_s``                n[rpm] P[kW]^0.5 / H^1.25       rpm kW^0.5 m^-1.25 (metric, power)
``n_QE``               n[rev/s] Q^0.5 / E^0.75         dimensionless (IEC 60193)
=====================  ==============================  =====================================

A similar (homologous) operating point of a geometrically similar machine has the same
``n11`` and ``q11`` (equivalently the same ``n_ED`` and ``Q_ED``); its efficiency differs
only by scale effects, which :func:`moody_step_up` and :func:`iec60193_step_up` estimate.

References
----------
IEC 60193:1999, Hydraulic turbines, storage pumps and pump-turbines - Model acceptance tests
(the factors n_ED, Q_ED, P_ED, the specific speed n_QE, the Reynolds number and the
scale-effect formula; formulas as recalled from the standard, marked "from memory").
S. L. Dixon and C. A. Hall, Fluid Mechanics and Thermodynamics of Turbomachinery, ch. on
hydraulic turbines (unit quantities, specific speed, similarity laws).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

ArrayLike = float | npt.NDArray[np.float64]

#: Unit conversions for the customary quantities (not physics constants).
SECONDS_PER_MINUTE = 60.0
W_PER_KW = 1000.0
RAD_PER_REV = 2.0 * np.pi

#: IEC 60193:1999 scale-effect formula: reference Reynolds number and exponent (from memory).
IEC60193_RE_REF = 7.0e6
IEC60193_EXPONENT = 0.16
#: IEC 60193:1999 ratio V_ref of scalable to total hydraulic losses at the optimum and at
#: Re_ref (from memory): 0.7 for Francis turbines, 0.8 for Kaplan turbines. Other machine
#: types are left to the caller (pass ``v_ref``), as their values were not confirmed here.
V_REF = {"francis": 0.7, "kaplan": 0.8}


def _rpm(speed: ArrayLike) -> ArrayLike:
    return np.asarray(speed) * SECONDS_PER_MINUTE / RAD_PER_REV


def _rev_per_s(speed: ArrayLike) -> ArrayLike:
    return np.asarray(speed) / RAD_PER_REV


def _out(value: npt.ArrayLike) -> ArrayLike:
    return float(value) if np.ndim(value) == 0 else np.asarray(value, dtype=np.float64)


# --- unit quantities (classical, head-based) ---------------------------------------------

def n11(speed: ArrayLike, diameter: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Unit speed ``n11 = n D / sqrt(H)``, n in rpm.

    Parameters
    ----------
    speed : [rad/s] rotational speed
    diameter : [m] reference (runner) diameter
    head : [m] net head

    Returns
    -------
    float or array [rpm m^0.5]
        The speed in rpm of the similar machine of 1 m diameter under 1 m head.

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (unit speed);
    the customary rpm-and-metre form used on hill charts.
    """
    return _out(_rpm(speed) * np.asarray(diameter) / np.sqrt(head))


def speed_from_n11(unit_speed: ArrayLike, diameter: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Inverse of :func:`n11`: rotational speed [rad/s] from n11 [rpm m^0.5], D [m], H [m]."""
    rpm = np.asarray(unit_speed) * np.sqrt(head) / np.asarray(diameter)
    return _out(rpm * RAD_PER_REV / SECONDS_PER_MINUTE)


def q11(flow: ArrayLike, diameter: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Unit flow ``Q11 = Q / (D^2 sqrt(H))``.

    Parameters
    ----------
    flow : [m3/s]
    diameter : [m]
    head : [m]

    Returns
    -------
    float or array [m^0.5/s]
        The flow in m3/s of the similar machine of 1 m diameter under 1 m head.

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (unit discharge).
    """
    return _out(np.asarray(flow) / (np.asarray(diameter) ** 2 * np.sqrt(head)))


def flow_from_q11(unit_flow: ArrayLike, diameter: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Inverse of :func:`q11`: flow [m3/s] from Q11 [m^0.5/s], D [m], H [m]."""
    return _out(np.asarray(unit_flow) * np.asarray(diameter) ** 2 * np.sqrt(head))


def p11(power: ArrayLike, diameter: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Unit power ``P11 = P / (D^2 H^1.5)`` with P in kW.

    Parameters
    ----------
    power : [W]
    diameter : [m]
    head : [m]

    Returns
    -------
    float or array [kW m^-3.5]
        The power in kW of the similar machine of 1 m diameter under 1 m head.

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (unit power).
    """
    kw = np.asarray(power) / W_PER_KW
    return _out(kw / (np.asarray(diameter) ** 2 * np.asarray(head) ** 1.5))


# --- IEC 60193 factors (specific-energy based, dimensionless) ----------------------------

def n_ed(speed: ArrayLike, diameter: ArrayLike, specific_energy: ArrayLike) -> ArrayLike:
    """Speed factor ``n_ED = n D / sqrt(E)``, n in rev/s (dimensionless).

    Parameters
    ----------
    speed : [rad/s]
    diameter : [m] reference diameter
    specific_energy : [J/kg] specific hydraulic energy E = g H

    References
    ----------
    IEC 60193:1999, definitions of the factors (from memory).
    """
    return _out(_rev_per_s(speed) * np.asarray(diameter) / np.sqrt(specific_energy))


def q_ed(flow: ArrayLike, diameter: ArrayLike, specific_energy: ArrayLike) -> ArrayLike:
    """Discharge factor ``Q_ED = Q / (D^2 sqrt(E))`` (dimensionless).

    Parameters
    ----------
    flow : [m3/s]
    diameter : [m]
    specific_energy : [J/kg]

    References
    ----------
    IEC 60193:1999, definitions of the factors (from memory).
    """
    return _out(np.asarray(flow) / (np.asarray(diameter) ** 2 * np.sqrt(specific_energy)))


def p_ed(power: ArrayLike, diameter: ArrayLike, specific_energy: ArrayLike,
         rho: ArrayLike) -> ArrayLike:
    """Power factor ``P_ED = P / (rho D^2 E^1.5)`` (dimensionless).

    Parameters
    ----------
    power : [W]
    diameter : [m]
    specific_energy : [J/kg]
    rho : [kg/m3] water density

    Notes
    -----
    ``P_ED = eta Q_ED`` for a turbine, since ``P = eta rho Q E``.

    References
    ----------
    IEC 60193:1999, definitions of the factors (from memory).
    """
    denominator = np.asarray(rho) * np.asarray(diameter) ** 2 * np.asarray(specific_energy) ** 1.5
    return _out(np.asarray(power) / denominator)


# --- specific speed ----------------------------------------------------------------------

def specific_speed_nq(speed: ArrayLike, flow: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Flow-based specific speed ``n_q = n Q^0.5 / H^0.75``, n in rpm.

    Parameters
    ----------
    speed : [rad/s]
    flow : [m3/s] (at the best-efficiency point, by convention)
    head : [m]

    Returns
    -------
    float or array [rpm m^0.75 s^-0.5]

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (specific speed);
    the metric form customary in European practice.
    """
    return _out(_rpm(speed) * np.sqrt(flow) / np.asarray(head) ** 0.75)


def specific_speed_ns(speed: ArrayLike, power: ArrayLike, head: ArrayLike) -> ArrayLike:
    """Power-based (metric) specific speed ``n_s = n P^0.5 / H^1.25``, n in rpm, P in kW.

    Parameters
    ----------
    speed : [rad/s]
    power : [W] shaft power (at the best-efficiency point, by convention)
    head : [m]

    Returns
    -------
    float or array [rpm kW^0.5 m^-1.25]
        Older texts use metric horsepower instead of kW; their n_s is larger by
        sqrt(1 kW / 1 PS) = sqrt(1000 / 735.5) = 1.166.

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (power specific
    speed); the kW-and-metre form of textbook examples.
    """
    kw = np.asarray(power) / W_PER_KW
    return _out(_rpm(speed) * np.sqrt(kw) / np.asarray(head) ** 1.25)


def specific_speed_nqe(speed: ArrayLike, flow: ArrayLike,
                       specific_energy: ArrayLike) -> ArrayLike:
    """IEC specific speed ``n_QE = n Q^0.5 / E^0.75``, n in rev/s (dimensionless).

    Parameters
    ----------
    speed : [rad/s]
    flow : [m3/s]
    specific_energy : [J/kg]

    References
    ----------
    IEC 60193:1999, specific speed n_QE (from memory).
    """
    return _out(_rev_per_s(speed) * np.sqrt(flow) / np.asarray(specific_energy) ** 0.75)


def power_specific_speed(speed: ArrayLike, power: ArrayLike, specific_energy: ArrayLike,
                         rho: ArrayLike) -> ArrayLike:
    """Dimensionless power specific speed ``omega sqrt(P / rho) / E^1.25``, omega in rad/s.

    Parameters
    ----------
    speed : [rad/s]
    power : [W]
    specific_energy : [J/kg]
    rho : [kg/m3]

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (dimensionless
    power specific speed); Hussain, Abdullah and Alimuddin, Basic Fluid Mechanics and
    Hydraulic Machines, Example 7.8.
    """
    return _out(np.asarray(speed) * np.sqrt(np.asarray(power) / np.asarray(rho))
                / np.asarray(specific_energy) ** 1.25)


def nq_from_nqe(nqe: ArrayLike, g: ArrayLike) -> ArrayLike:
    """Convert n_QE (dimensionless) to n_q [rpm m^0.75 s^-0.5]: ``n_q = 60 g^0.75 n_QE``.

    Derived from the two definitions with ``E = g H`` and n[rpm] = 60 n[rev/s]; about
    333 at g = 9.81 m/s2 (the factor commonly quoted; from memory).

    Parameters
    ----------
    nqe : dimensionless
    g : [m/s2] local gravity
    """
    return _out(SECONDS_PER_MINUTE * np.asarray(g) ** 0.75 * np.asarray(nqe))


def ns_from_nq(nq: ArrayLike, efficiency: ArrayLike, rho: ArrayLike, g: ArrayLike
               ) -> ArrayLike:
    """Convert n_q to the metric power specific speed n_s (P in kW) of a turbine.

    ``n_s = n_q sqrt(rho g eta / 1000)``: derived by putting the turbine power
    ``P = eta rho g Q H`` (in kW, ``/1000``) into the definition of n_s.

    Parameters
    ----------
    nq : [rpm m^0.75 s^-0.5]
    efficiency : fraction, turbine efficiency at the point
    rho : [kg/m3]
    g : [m/s2]

    Returns
    -------
    float or array [rpm kW^0.5 m^-1.25]
    """
    factor = np.asarray(rho) * np.asarray(g) * np.asarray(efficiency) / W_PER_KW
    return _out(np.asarray(nq) * np.sqrt(factor))


# --- affinity (similarity) laws ----------------------------------------------------------

@dataclass(frozen=True)
class SimilarPoint:
    """An operating point moved by the affinity laws (SI units).

    Attributes
    ----------
    flow : [m3/s]
    power : [W]
    speed : [rad/s]
    diameter : [m]
    head : [m]
    """

    flow: ArrayLike
    power: ArrayLike
    speed: ArrayLike
    diameter: ArrayLike
    head: ArrayLike


def affinity(flow: ArrayLike, power: ArrayLike, speed: ArrayLike, diameter: ArrayLike,
             head: ArrayLike, *, to_speed: ArrayLike | None = None,
             to_diameter: ArrayLike | None = None,
             to_head: ArrayLike | None = None) -> SimilarPoint:
    """Move an operating point to the homologous point of a similar machine or state.

    Parameters
    ----------
    flow : [m3/s], power : [W], speed : [rad/s], diameter : [m], head : [m]
        The known operating point.
    to_speed : [rad/s], optional
        Speed of the new point. Give either this or ``to_head``, not both (the head and the
        speed of a homologous point are tied by equal n11).
    to_diameter : [m], optional
        Diameter of the similar machine; default the same machine.
    to_head : [m], optional
        Head of the new point. When neither ``to_speed`` nor ``to_head`` is given the head
        stays the same.

    Returns
    -------
    SimilarPoint
        With ``r_n = n2/n1`` and ``r_D = D2/D1``: ``Q2 = Q1 r_n r_D^3``,
        ``P2 = P1 r_n^3 r_D^5``, ``H2 = H1 r_n^2 r_D^2``; equivalently n11, Q11 and P11 are
        unchanged, so at one diameter ``Q ~ sqrt(H)``, ``P ~ H^1.5``, ``n ~ sqrt(H)``.

    Notes
    -----
    Same efficiency and same density at both points: scale effects on efficiency are
    not included (see :func:`moody_step_up`, :func:`iec60193_step_up`), and a power moved
    to another water temperature should be rescaled by the density ratio by the caller.

    References
    ----------
    Dixon and Hall, Fluid Mechanics and Thermodynamics of Turbomachinery (similarity laws);
    IEC 60193:1999 (equal n_ED and Q_ED at homologous points).
    """
    if to_speed is not None and to_head is not None:
        raise ValueError("affinity: give to_speed or to_head, not both (they are tied by "
                         "equal n11 at a homologous point)")
    n1 = np.asarray(speed, dtype=np.float64)
    d1 = np.asarray(diameter, dtype=np.float64)
    h1 = np.asarray(head, dtype=np.float64)
    d2 = d1 if to_diameter is None else np.asarray(to_diameter, dtype=np.float64)
    r_d = d2 / d1
    if to_speed is not None:
        r_n = np.asarray(to_speed, dtype=np.float64) / n1
    else:
        h2_given = h1 if to_head is None else np.asarray(to_head, dtype=np.float64)
        r_n = np.sqrt(h2_given / h1) / r_d  # equal n11: n D / sqrt(H) constant
    return SimilarPoint(
        flow=_out(np.asarray(flow) * r_n * r_d**3),
        power=_out(np.asarray(power) * r_n**3 * r_d**5),
        speed=_out(n1 * r_n),
        diameter=_out(np.broadcast_to(d2, np.broadcast(d2, r_n).shape)),
        head=_out(h1 * r_n**2 * r_d**2),
    )


# --- Reynolds number and efficiency step-up ----------------------------------------------

def reynolds_number(diameter: ArrayLike, speed: ArrayLike,
                    kinematic_viscosity: ArrayLike) -> ArrayLike:
    """Machine Reynolds number ``Re = D u / nu`` with ``u = pi n D = omega D / 2``.

    Parameters
    ----------
    diameter : [m] reference diameter D
    speed : [rad/s] rotational speed omega
    kinematic_viscosity : [m2/s] nu, e.g. :func:`analytics.water.kinematic_viscosity`

    Returns
    -------
    float or array, dimensionless
        ``Re = omega D^2 / (2 nu)``: u is the peripheral speed at the reference diameter.

    References
    ----------
    IEC 60193:1999, definition of the Reynolds number for the scale-effect formula
    (``Re = D u / nu``, u the peripheral velocity at D; from memory).
    """
    u = np.asarray(speed) * np.asarray(diameter) / 2.0
    return _out(np.asarray(diameter) * u / np.asarray(kinematic_viscosity))


def moody_step_up(eta_model: ArrayLike, diameter_model: ArrayLike,
                  diameter_prototype: ArrayLike, head_model: ArrayLike | None = None,
                  head_prototype: ArrayLike | None = None, *,
                  diameter_exponent: float | None = None,
                  head_exponent: float = 0.1) -> ArrayLike:
    """Prototype efficiency from a model efficiency by Moody's formula.

    ``(1 - eta_p) / (1 - eta_m) = (D_m / D_p)^a (H_m / H_p)^b``

    Parameters
    ----------
    eta_model : fraction, model efficiency (at its best point, by convention)
    diameter_model, diameter_prototype : [m]
    head_model, head_prototype : [m], optional
        Give both or neither. Without them the head term is left out.
    diameter_exponent : a, optional
        Default 1/4 when heads are given (Moody's formula with the head term) and 1/5
        without (the size-only form of the textbooks). The two defaults are two published
        formulas, not one formula with an optional term: equal heads given and no heads
        given differ by the exponent on D.
    head_exponent : b, default 1/10

    Returns
    -------
    float or array, fraction

    References
    ----------
    L. F. Moody (1925), "The propeller type turbine", Trans. ASCE 89 (1926) (citation from
    memory): losses ``(1 - eta) ~ 1 / (D^0.25 H^0.1)``, the form quoted in the abstract of
    a 1947 paper on scale correction of fluid machines, Proc. IMechE 157,
    doi:10.1243/PIME_PROC_1947_157_012_02.
    The size-only form with exponent 1/5 is the textbook version (e.g. Eq. 16.15 of the
    worked example at https://holooly.com/?p=1195255; attributed there to a fluid
    mechanics textbook). Both are rough estimates; contractual step-up follows IEC 60193 /
    IEC 62097.
    """
    if (head_model is None) != (head_prototype is None):
        raise ValueError("moody_step_up: give both head_model and head_prototype, or neither")
    with_heads = head_model is not None
    a = diameter_exponent if diameter_exponent is not None else (0.25 if with_heads else 0.2)
    ratio = (np.asarray(diameter_model) / np.asarray(diameter_prototype)) ** a
    if with_heads:
        ratio = ratio * (np.asarray(head_model) / np.asarray(head_prototype)) ** head_exponent
    return _out(1.0 - (1.0 - np.asarray(eta_model)) * ratio)


@dataclass(frozen=True)
class StepUp:
    """Result of the IEC 60193:1999 scale-effect computation.

    Attributes
    ----------
    delta_ref : relative scalable loss at Re_ref, fraction
    delta_eta : hydraulic-efficiency step-up Delta eta_h (prototype minus model), fraction
    eta_prototype : prototype hydraulic efficiency ``eta_hM + delta_eta``, fraction
    """

    delta_ref: ArrayLike
    delta_eta: ArrayLike
    eta_prototype: ArrayLike


def iec60193_step_up(eta_hydraulic_model: ArrayLike, reynolds_model: ArrayLike,
                     reynolds_prototype: ArrayLike, *, v_ref: float,
                     eta_hydraulic_model_opt: ArrayLike | None = None,
                     reynolds_model_opt: ArrayLike | None = None,
                     reynolds_ref: float = IEC60193_RE_REF,
                     exponent: float = IEC60193_EXPONENT) -> StepUp:
    """Hydraulic-efficiency step-up from model to prototype, IEC 60193:1999 (turbines).

    ``delta_ref = (1 - eta_hM,opt) / ((Re_ref / Re_M,opt)^0.16 + (1 - V_ref) / V_ref)``

    ``Delta eta_h = delta_ref ((Re_ref / Re_M)^0.16 - (Re_ref / Re_P)^0.16)``

    ``eta_hP = eta_hM + Delta eta_h``

    Parameters
    ----------
    eta_hydraulic_model : fraction, model hydraulic efficiency at the point stepped up
    reynolds_model, reynolds_prototype : dimensionless, see :func:`reynolds_number`
    v_ref : fraction of the hydraulic losses that scale with Re, at the model optimum and
        at Re_ref; ``V_REF["francis"]`` (0.7) or ``V_REF["kaplan"]`` (0.8)
    eta_hydraulic_model_opt, reynolds_model_opt : optional
        The model's optimum (best-efficiency) hydraulic efficiency and its Reynolds number,
        from which delta_ref is set once per machine. Default: the point itself.
    reynolds_ref : default 7e6
    exponent : default 0.16

    Returns
    -------
    StepUp

    Notes
    -----
    By construction, at the optimum and ``Re = Re_ref`` the scalable losses
    ``delta_ref (Re_ref/Re)^0.16`` are the fraction ``V_ref`` of the total losses
    ``1 - eta_h``. The step-up applies to the hydraulic efficiency only (mechanical
    losses such as bearings are accounted separately).

    The formula, Re_ref, the exponent and the V_ref values are as recalled from
    IEC 60193:1999 (from memory). IEC 62097:2009 replaced this formula for contractual
    use, noting that it generally overstated the step-up; treat results as estimates. A
    reference curve stepped up this way informs efficiency monitoring; it does not replace
    acceptance testing, and local codes and licensed practice prevail.

    References
    ----------
    IEC 60193:1999, Hydraulic turbines, storage pumps and pump-turbines - Model acceptance
    tests, scale-effect formula for the hydraulic efficiency. IEC 62097:2009, Hydraulic
    machines, radial and axial - Performance conversion method from model to prototype.
    """
    eta_m = np.asarray(eta_hydraulic_model, dtype=np.float64)
    re_m = np.asarray(reynolds_model, dtype=np.float64)
    re_p = np.asarray(reynolds_prototype, dtype=np.float64)
    eta_opt = eta_m if eta_hydraulic_model_opt is None else np.asarray(eta_hydraulic_model_opt)
    re_opt = re_m if reynolds_model_opt is None else np.asarray(reynolds_model_opt)
    if not 0.0 < v_ref <= 1.0:
        raise ValueError(f"iec60193_step_up: v_ref must be in (0, 1], got {v_ref}")
    delta_ref = (1.0 - eta_opt) / ((reynolds_ref / re_opt) ** exponent + (1.0 - v_ref) / v_ref)
    delta_eta = delta_ref * ((reynolds_ref / re_m) ** exponent - (reynolds_ref / re_p) ** exponent)
    return StepUp(delta_ref=_out(delta_ref), delta_eta=_out(delta_eta),
                  eta_prototype=_out(eta_m + delta_eta))
