"""Unit quantities, specific speed, affinity laws and step-up against published examples,
the defining formulas of the standards, and properties of the similarity laws."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analytics.similarity import (
    IEC60193_EXPONENT,
    IEC60193_RE_REF,
    V_REF,
    affinity,
    flow_from_q11,
    iec60193_step_up,
    moody_step_up,
    n11,
    n_ed,
    nq_from_nqe,
    ns_from_nq,
    p11,
    p_ed,
    power_specific_speed,
    q11,
    q_ed,
    reynolds_number,
    specific_speed_nq,
    specific_speed_nqe,
    specific_speed_ns,
    speed_from_n11,
)


def rad_s(rpm: float) -> float:
    return rpm * 2.0 * math.pi / 60.0


# --- published specific-speed examples ---------------------------------------------------

def test_specific_speed_worked_example_10000_kw() -> None:
    # Worked example, https://curioustab.com/turbine-develops-10000-kw-under-head-25-metres-
    # 135-rpm-its-65472 : P = 10,000 kW, H = 25 m, N = 135 rpm; sqrt(P) = 100,
    # 25^1.25 = 55.9017, N_s = 241.5 (the page's printed answer).
    n_s = specific_speed_ns(rad_s(135.0), 10_000e3, 25.0)
    assert n_s == pytest.approx(135.0 * 100.0 / 55.9017, rel=1e-5)
    assert n_s == pytest.approx(241.5, abs=0.05)


def test_specific_speed_worked_example_pelton_station() -> None:
    # Hussain, Abdullah and Alimuddin, Basic Fluid Mechanics and Hydraulic Machines,
    # Example 7.8 (a Pelton station; page text as stored at studmed.ru): P = 26.1 MW,
    # H = 587.3 m, N = 428 rpm, Q = 6.85 m3/s, g = 9.8 m/s2, rho = 1000 kg/m3. Printed
    # intermediates: omega = 44.7 rad/s, sqrt(P / 1 kW) = 161.5, H^1.25 = 2891,
    # (gH)^1.25 = 50131, dimensionless power specific speed 0.144, efficiency 66.2 %.
    omega = rad_s(428.0)
    omega_s = power_specific_speed(omega, 26.1e6, 9.8 * 587.3, 1000.0)
    # the book rounds omega to 44.7 rad/s (exactly 44.82, 0.3 % more)
    assert omega_s == pytest.approx(44.7 * 161.5 / 50131.0, rel=5e-3)
    assert omega_s == pytest.approx(0.144, abs=0.001)
    # metric n_s from the same printed intermediates: 428 * 161.5 / 2891
    n_s = specific_speed_ns(omega, 26.1e6, 587.3)
    assert n_s == pytest.approx(428.0 * 161.5 / 2891.0, rel=1e-3)
    efficiency = 26.1e6 / (1000.0 * 9.8 * 6.85 * 587.3)  # the book's 66.2 %
    # n_q of the same point, and the conversion n_s = n_q sqrt(rho g eta / 1000) (derived in
    # analytics.similarity.ns_from_nq) gives the same n_s
    n_q = specific_speed_nq(omega, 6.85, 587.3)
    assert n_q == pytest.approx(428.0 * math.sqrt(6.85) / 587.3**0.75, rel=1e-12)
    assert ns_from_nq(n_q, efficiency, 1000.0, 9.8) == pytest.approx(n_s, rel=1e-12)


def test_nq_from_nqe_and_iec_factors() -> None:
    # n_q = 60 g^0.75 n_QE: about 333 n_QE at g = 9.81 (the commonly quoted factor,
    # from memory)
    assert nq_from_nqe(1.0, 9.81) == pytest.approx(333.0, abs=0.5)
    omega, flow, head, g = rad_s(250.0), 40.0, 120.0, 9.81
    assert nq_from_nqe(specific_speed_nqe(omega, flow, g * head), g) == pytest.approx(
        specific_speed_nq(omega, flow, head), rel=1e-12)
    # IEC 60193 factors from their definitions (from memory): n_ED = n[rev/s] D / sqrt(E),
    # Q_ED = Q / (D^2 sqrt(E)), P_ED = P / (rho D^2 E^1.5); so n_ED = n11 / (60 sqrt(g)),
    # Q_ED = Q11 / sqrt(g) and P_ED = eta Q_ED
    diameter, rho, eta = 2.5, 998.0, 0.93
    energy = g * head
    power = eta * rho * flow * energy
    assert n_ed(omega, diameter, energy) == pytest.approx(
        (250.0 / 60.0) * diameter / math.sqrt(energy), rel=1e-12)
    assert n_ed(omega, diameter, energy) == pytest.approx(
        n11(omega, diameter, head) / (60.0 * math.sqrt(g)), rel=1e-12)
    assert q_ed(flow, diameter, energy) == pytest.approx(
        q11(flow, diameter, head) / math.sqrt(g), rel=1e-12)
    assert p_ed(power, diameter, energy, rho) == pytest.approx(
        eta * q_ed(flow, diameter, energy), rel=1e-12)
    # P11 = P[kW] / (D^2 H^1.5)
    assert p11(power, diameter, head) == pytest.approx(
        power / 1000.0 / (diameter**2 * head**1.5), rel=1e-12)


# --- unit quantities -----------------------------------------------------------------------

def test_unit_speed_worked_example_head_change() -> None:
    # Worked example, https://www.sarthaks.com/2500051/ : a turbine at 1000 rpm under 30 m;
    # head reduced to 18 m: N2 = 1000 sqrt(18/30) = 774.6 rpm (printed answer), from
    # N_u = N / sqrt(H) constant; P_u = P / H^1.5 constant gives P2 = 8000 (18/30)^1.5 kW.
    moved = affinity(1.0, 8000e3, rad_s(1000.0), 1.0, 30.0, to_head=18.0)
    assert moved.speed * 60.0 / (2.0 * math.pi) == pytest.approx(774.6, abs=0.05)
    assert moved.power == pytest.approx(8000e3 * (18.0 / 30.0) ** 1.5, rel=1e-12)
    assert n11(moved.speed, 1.0, 18.0) == pytest.approx(n11(rad_s(1000.0), 1.0, 30.0))


positive = st.floats(min_value=1e-2, max_value=1e3, allow_nan=False, allow_infinity=False)


@given(speed=positive, diameter=positive, head=positive, flow=positive)
def test_unit_quantity_round_trips(speed: float, diameter: float, head: float,
                                   flow: float) -> None:
    unit_speed = n11(speed, diameter, head)
    assert speed_from_n11(unit_speed, diameter, head) == pytest.approx(speed, rel=1e-12)
    assert unit_speed == pytest.approx(speed * 60 / (2 * math.pi) * diameter / math.sqrt(head),
                                       rel=1e-12)
    unit_flow = q11(flow, diameter, head)
    assert flow_from_q11(unit_flow, diameter, head) == pytest.approx(flow, rel=1e-12)


def test_unit_quantities_vectorised() -> None:
    speeds = np.array([10.0, 20.0, 30.0])
    out = n11(speeds[:, None], np.array([1.0, 2.0]), 100.0)
    assert out.shape == (3, 2)
    assert out[2, 1] == pytest.approx(n11(30.0, 2.0, 100.0))
    assert isinstance(n11(10.0, 1.0, 100.0), float)


# --- affinity laws -------------------------------------------------------------------------

ratio = st.floats(min_value=0.1, max_value=10.0, allow_nan=False, allow_infinity=False)


@settings(max_examples=200)
@given(flow=positive, power=positive, speed=positive, diameter=positive, head=positive,
       r_n=ratio, r_d=ratio)
def test_affinity_laws_properties(flow: float, power: float, speed: float, diameter: float,
                                  head: float, r_n: float, r_d: float) -> None:
    # similarity laws (Dixon and Hall, Fluid Mechanics and Thermodynamics of
    # Turbomachinery): Q ~ n D^3, P ~ n^3 D^5, H ~ n^2 D^2
    moved = affinity(flow, power, speed, diameter, head, to_speed=speed * r_n,
                     to_diameter=diameter * r_d)
    assert moved.flow == pytest.approx(flow * r_n * r_d**3, rel=1e-12)
    assert moved.power == pytest.approx(power * r_n**3 * r_d**5, rel=1e-12)
    assert moved.head == pytest.approx(head * r_n**2 * r_d**2, rel=1e-12)
    # the homologous point keeps n11, Q11 and P11 (the definition of similar points)
    assert n11(moved.speed, moved.diameter, moved.head) == pytest.approx(
        n11(speed, diameter, head), rel=1e-12)
    assert q11(moved.flow, moved.diameter, moved.head) == pytest.approx(
        q11(flow, diameter, head), rel=1e-12)
    assert p11(moved.power, moved.diameter, moved.head) == pytest.approx(
        p11(power, diameter, head), rel=1e-12)
    # moved there and back is the point itself
    back = affinity(moved.flow, moved.power, moved.speed, moved.diameter, moved.head,
                    to_speed=speed, to_diameter=diameter)
    for got, want in zip((back.flow, back.power, back.speed, back.diameter, back.head),
                         (flow, power, speed, diameter, head), strict=True):
        assert got == pytest.approx(want, rel=1e-12)


@given(flow=positive, power=positive, speed=positive, head=positive, r_h=ratio)
def test_affinity_at_fixed_n11_flow_goes_with_sqrt_head(flow: float, power: float,
                                                        speed: float, head: float,
                                                        r_h: float) -> None:
    # same machine, new head, same n11: Q ~ sqrt(H), P ~ H^1.5, n ~ sqrt(H)
    moved = affinity(flow, power, speed, 3.0, head, to_head=head * r_h)
    assert moved.head == pytest.approx(head * r_h, rel=1e-12)
    assert moved.flow == pytest.approx(flow * math.sqrt(r_h), rel=1e-12)
    assert moved.power == pytest.approx(power * r_h**1.5, rel=1e-12)
    assert moved.speed == pytest.approx(speed * math.sqrt(r_h), rel=1e-12)


def test_affinity_arguments() -> None:
    with pytest.raises(ValueError, match="not both"):
        affinity(1.0, 1.0, 1.0, 1.0, 1.0, to_speed=2.0, to_head=4.0)
    same = affinity(10.0, 5e6, 30.0, 2.0, 50.0)
    assert (same.flow, same.power, same.speed, same.head) == pytest.approx(
        (10.0, 5e6, 30.0, 50.0))
    # a bigger machine under the same head turns slower: n ~ 1/D at fixed n11 and H
    bigger = affinity(10.0, 5e6, 30.0, 2.0, 50.0, to_diameter=4.0)
    assert bigger.speed == pytest.approx(15.0) and bigger.head == pytest.approx(50.0)
    assert bigger.flow == pytest.approx(40.0)  # Q ~ D^2 at fixed Q11 and H
    arrays = affinity(np.array([1.0, 2.0]), np.array([1e6, 2e6]), 30.0, 2.0, 50.0,
                      to_speed=np.array([60.0, 15.0]))
    assert arrays.flow == pytest.approx([2.0, 1.0])
    assert np.shape(arrays.diameter) == (2,)


# --- efficiency step-up --------------------------------------------------------------------

def test_moody_worked_example_francis_runner() -> None:
    # Worked example, https://holooly.com/?p=1195255 (textbook Eq. 16.15, the size-only
    # Moody form with exponent 1/5): model D = 2.0 ft, eta = 0.893; prototype D = 6.0 ft.
    # Printed: (6/2)^(1/5) = 1.246, eta_p = 0.914.
    eta_p = moody_step_up(0.893, 2.0, 6.0)
    assert (1.0 - 0.893) / (1.0 - eta_p) == pytest.approx(1.246, abs=5e-4)
    assert eta_p == pytest.approx(0.914, abs=5e-4)


def test_moody_size_only_example() -> None:
    # 0.90 at D = 0.35 m to D = 3.5 m, size-only form (exponent 1/5): the ratio of losses is
    # 10^-0.2 = 0.63096, so eta_p = 1 - 0.1 * 0.63096 = 0.93690 (arithmetic of the formula)
    eta_p = moody_step_up(0.90, 0.35, 3.5)
    assert (1.0 - eta_p) / 0.1 == pytest.approx(0.630957, abs=1e-6)
    assert eta_p == pytest.approx(0.936904, abs=1e-6)


def test_moody_with_head_term() -> None:
    # Moody (1925) with heads, losses ~ D^-1/4 H^-1/10 (the form quoted in the abstract of
    # Proc. IMechE 157 (1947), doi:10.1243/PIME_PROC_1947_157_012_02): model D 0.35 m under
    # 10 m, prototype D 3.5 m under 100 m: ratio 10^-0.25 * 10^-0.1 = 10^-0.35 = 0.446684
    eta_p = moody_step_up(0.90, 0.35, 3.5, 10.0, 100.0)
    assert (1.0 - eta_p) / 0.1 == pytest.approx(0.446684, abs=1e-6)
    ratio_d = 10.0**-0.25  # 0.562341
    # equal heads: only the diameter term (1/4) remains
    assert moody_step_up(0.90, 0.35, 3.5, 50.0, 50.0) == pytest.approx(
        1.0 - 0.1 * ratio_d, abs=1e-12)
    # explicit exponent overrides the default
    assert moody_step_up(0.90, 0.35, 3.5, diameter_exponent=0.25) == pytest.approx(
        1.0 - 0.1 * ratio_d, abs=1e-12)
    with pytest.raises(ValueError, match="both"):
        moody_step_up(0.9, 0.35, 3.5, head_model=10.0)
    # the same machine size steps nothing up; arrays broadcast
    assert moody_step_up(np.array([0.88, 0.92]), 1.0, 1.0) == pytest.approx([0.88, 0.92])


def test_reynolds_number_iec60193_definition() -> None:
    # IEC 60193: Re = D u / nu with u = pi n D, n in rev/s (from memory). Model D = 0.35 m
    # at 1000 rpm in water of nu = 1.0034e-6 m2/s (20 degC):
    # u = pi (1000/60) 0.35 = 18.326 m/s, Re = 0.35 * 18.326 / 1.0034e-6 = 6.3924e6
    reynolds = reynolds_number(0.35, rad_s(1000.0), 1.0034e-6)
    assert reynolds == pytest.approx(0.35 * (math.pi * 1000.0 / 60.0 * 0.35) / 1.0034e-6,
                                     rel=1e-12)
    assert reynolds == pytest.approx(6.3924e6, rel=1e-4)


def test_iec60193_step_up_step_by_step() -> None:
    # IEC 60193:1999 scale-effect formula, from memory:
    #   delta_ref = (1 - eta_hM,opt) / ((Re_ref/Re_M,opt)^0.16 + (1 - V_ref)/V_ref)
    #   d_eta_h = delta_ref ((Re_ref/Re_M)^0.16 - (Re_ref/Re_P)^0.16), Re_ref = 7e6
    # Francis (V_ref = 0.7): model optimum eta_h = 0.92 at Re_M = 6.0e6, prototype
    # Re_P = 6.0e7 (ten times the model's).
    assert IEC60193_RE_REF == 7.0e6 and IEC60193_EXPONENT == 0.16
    assert V_REF["francis"] == 0.7 and V_REF["kaplan"] == 0.8
    # Intermediate values worked out separately on a calculator:
    #   a_M = (7e6 / 6e6)^0.16 = 1.024971, a_P = (7e6 / 6e7)^0.16 = 0.709107
    #   delta_ref = 0.08 / (1.024971 + 0.3/0.7) = 0.055038
    #   d_eta_h = 0.055038 * (1.024971 - 0.709107) = 0.017385 (1.74 points)
    result = iec60193_step_up(0.92, 6.0e6, 6.0e7, v_ref=V_REF["francis"])
    assert result.delta_ref == pytest.approx(0.055038, abs=1e-6)
    assert result.delta_eta == pytest.approx(0.017385, abs=1e-6)
    assert result.eta_prototype == pytest.approx(0.92 + 0.017385, abs=1e-6)
    # and the same from the formula written out here, to round-off
    a_m, a_p = (7.0e6 / 6.0e6) ** 0.16, (7.0e6 / 6.0e7) ** 0.16
    assert result.delta_ref == pytest.approx(0.08 / (a_m + 0.3 / 0.7), rel=1e-12)
    assert result.delta_eta == pytest.approx(result.delta_ref * (a_m - a_p), rel=1e-12)


def test_iec60193_step_up_properties() -> None:
    # V_ref is, by the construction of the formula, the scalable share of the losses at
    # the optimum when Re_M = Re_ref: delta_ref / (1 - eta_h) = V_ref
    at_ref = iec60193_step_up(0.90, 7.0e6, 7.0e7, v_ref=0.7)
    assert at_ref.delta_ref / 0.10 == pytest.approx(0.7, rel=1e-12)
    # no step-up without a change of Reynolds number
    assert iec60193_step_up(0.90, 5e6, 5e6, v_ref=0.7).delta_eta == pytest.approx(0.0)
    # a larger scalable share gives a larger step-up (Kaplan 0.8 vs Francis 0.7)
    francis = iec60193_step_up(0.90, 5e6, 5e7, v_ref=V_REF["francis"])
    kaplan = iec60193_step_up(0.90, 5e6, 5e7, v_ref=V_REF["kaplan"])
    assert kaplan.delta_eta > francis.delta_eta > 0.0
    # delta_ref is set at the optimum and applied to other points of the hill chart
    part_load = iec60193_step_up(0.85, 5.5e6, 5.5e7, v_ref=0.7,
                                 eta_hydraulic_model_opt=0.92, reynolds_model_opt=6e6)
    assert part_load.delta_ref == pytest.approx(
        iec60193_step_up(0.92, 6e6, 6e7, v_ref=0.7).delta_ref, rel=1e-12)
    # arrays broadcast
    arr = iec60193_step_up(np.array([0.90, 0.91]), 5e6, np.array([5e7, 1e8]), v_ref=0.7)
    assert np.shape(arr.eta_prototype) == (2,)
    with pytest.raises(ValueError, match="v_ref"):
        iec60193_step_up(0.9, 5e6, 5e7, v_ref=1.5)
