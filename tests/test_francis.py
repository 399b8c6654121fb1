"""Francis mean-line model: triangles step by step, energy balance, similarity laws."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analytics.runners.base import RunnerModel
from analytics.runners.francis import (
    COEFFICIENT_NAMES,
    DESIGN_OPENING,
    FrancisGeometry,
    FrancisModel,
    design_coefficients,
)

RHO = 1000.0
G = 9.81
RPM = 2.0 * math.pi / 60.0

# The lead's plant-file example: a high-head Francis runner, 750 rpm, 500 m.
EXAMPLE = FrancisGeometry(inlet_radius=0.93, inlet_height=0.16, outlet_radius=0.56,
                          outlet_area=1.70, blade_inlet_angle=math.radians(-26.0),
                          blade_outlet_angle=math.radians(-76.6))
OMEGA = 750.0 * RPM
HEAD = 500.0
COEFFS = design_coefficients(EXAMPLE, speed=OMEGA, head=HEAD, rho=RHO, g=G)
MODEL = FrancisModel(EXAMPLE, COEFFS)
LOSS_FREE = {name: 0.0 for name in COEFFICIENT_NAMES}

SETTINGS = settings(max_examples=60, deadline=None)


def test_is_a_runner_model_and_coefficients_are_named() -> None:
    assert isinstance(MODEL, RunnerModel)
    assert MODEL.runner_type == "francis"
    assert MODEL.coefficient_names == COEFFICIENT_NAMES
    bounds = MODEL.coefficient_bounds()
    assert set(bounds) == set(COEFFICIENT_NAMES)
    for name, value in COEFFS.items():
        low, high = bounds[name]
        assert 0.0 <= low <= value <= high, name


def test_with_coefficients_copies_and_checks_names() -> None:
    other = MODEL.with_coefficients({"leakage": 0.5})
    assert other.coefficients["leakage"] == 0.5
    assert MODEL.coefficients["leakage"] == COEFFS["leakage"]  # original untouched
    assert other.coefficients["friction"] == COEFFS["friction"]
    with pytest.raises(KeyError):
        MODEL.with_coefficients({"labyrinth": 1.0})
    with pytest.raises(ValueError, match="non-negative"):
        MODEL.with_coefficients({"friction": -0.1})
    with pytest.raises(ValueError, match="missing"):
        FrancisModel(EXAMPLE, {"friction": 0.1})


def test_inlet_triangle_of_a_textbook_francis_via_the_model() -> None:
    # R.K. Bansal, "A Textbook of Fluid Mechanics and Hydraulic Machines", ch. 18, the
    # Francis problem also used in test_triangles (from memory): H = 7.62 m, 150 rpm,
    # Q = 148.25 kW / (rho g H 0.75), D1 = 0.4047 m, B1 = 0.177 m, guide blade angle
    # 32.62 deg and vane angle 37.74 deg from the tangent, u1 = 3.18 m/s,
    # Vf1 = 11.74 m/s, Vw1 = 18.34 m/s, shock-free entry.
    flow = 148.25e3 / (RHO * G * 7.62 * 0.75)
    geo = FrancisGeometry(inlet_radius=0.4047 / 2, inlet_height=0.177, outlet_radius=0.12,
                          outlet_area=0.3, blade_inlet_angle=math.radians(90 - 37.74),
                          blade_outlet_angle=math.radians(-60.0),
                          full_opening_angle=math.radians(90 - 32.62))
    model = FrancisModel(geo, dict(LOSS_FREE, incidence=1.0))
    s = model.state(flow, 150 * RPM, 1.0)
    assert float(s.inlet.u) == pytest.approx(3.18, abs=0.01)
    assert float(s.inlet.c_m) == pytest.approx(11.74, abs=0.03)  # B1 printed to 1 mm
    assert float(s.inlet.c_theta) == pytest.approx(18.34, abs=0.05)
    # the book's runner work, 0.78 g H, with radial discharge (u1 Vw1 alone)
    assert float(s.inlet.u * s.inlet.c_theta) == pytest.approx(0.78 * G * 7.62, rel=5e-3)
    # the book sizes the vane to the flow, so the shock loss nearly vanishes (rounding)
    assert float(s.incidence) < 1e-3 * G * 7.62


def test_example_triangles_step_by_step_at_the_design_flow() -> None:
    # Hand calculation with the textbook triangle formulas (Dixon & Hall ch. 9; domain
    # primer section 3) for the plant-file geometry at 750 rpm and Q = 17.9 m3/s.
    q = 17.9
    u1, u2 = OMEGA * 0.93, OMEGA * 0.56
    assert u1 == pytest.approx(73.04, abs=0.01) and u2 == pytest.approx(43.98, abs=0.01)
    c_m1 = q / (2 * math.pi * 0.93 * 0.16)
    c_m2 = q / 1.70
    assert c_m1 == pytest.approx(19.15, abs=0.01) and c_m2 == pytest.approx(10.53, abs=0.01)
    # outlet following the blade: c_theta2 = U2 + c_m2 tan(beta2b), nearly swirl-free
    c_theta2 = u2 + c_m2 * math.tan(math.radians(-76.6))
    assert abs(c_theta2) < 0.5
    s = MODEL.state(q, OMEGA, DESIGN_OPENING)
    assert float(s.inlet.u) == pytest.approx(u1, rel=1e-12)
    assert float(s.inlet.c_m) == pytest.approx(c_m1, rel=1e-12)
    assert float(s.outlet.c_m) == pytest.approx(c_m2, rel=1e-12)
    assert float(s.outlet.c_theta) == pytest.approx(c_theta2, rel=1e-9, abs=1e-9)
    # inlet flow angle from the throat law: cos(alpha1) = y cos(alpha1_full)
    alpha1 = math.acos(DESIGN_OPENING * math.cos(EXAMPLE.full_opening_angle))
    assert float(s.inlet.alpha) == pytest.approx(alpha1, rel=1e-12)
    assert float(s.inlet.c_theta) == pytest.approx(c_m1 * math.tan(alpha1), rel=1e-12)
    # Euler work and its share of E = g H (a hydraulic efficiency near 0.95)
    work = u1 * c_m1 * math.tan(alpha1) - u2 * c_theta2
    assert float(s.work) == pytest.approx(work, rel=1e-12)
    assert 0.93 < work / (G * HEAD) < 0.97
    # nearly shock-free: 17.9 m3/s is 0.5 % above the geometric swirl-free flow of
    # 17.81 m3/s, and w_theta1 = c_theta1 - U1 is a small difference of large terms
    assert math.degrees(float(s.inlet.beta)) == pytest.approx(-26.0, abs=1.0)


def test_design_angle_is_shock_free_and_swirl_free() -> None:
    # by construction of FrancisGeometry.design_flow_angle (U2 + c_m2 tan beta2 = 0 and
    # w_theta1 = c_m1 tan beta1b at the same flow)
    q_d = OMEGA * EXAMPLE.design_flow_coefficient
    s = FrancisModel(EXAMPLE, dict(LOSS_FREE, incidence=1.0, swirl=1.0)).state(
        q_d, OMEGA, DESIGN_OPENING)
    assert float(s.incidence) == pytest.approx(0.0, abs=1e-9)
    assert float(s.outlet.c_theta) == pytest.approx(0.0, abs=1e-9)
    assert float(EXAMPLE.flow_angle(DESIGN_OPENING)) == pytest.approx(
        EXAMPLE.design_flow_angle, rel=1e-12)


def test_typical_coefficients_land_at_a_realistic_best_point() -> None:
    # domain primer section 3 and common practice: a large Francis peaks at 0.93-0.95,
    # at a flow a little below its rated (full-load) flow, here about 17.9 m3/s.
    openings = np.linspace(0.05, 1.0, 951)
    sol = MODEL.solve(HEAD, OMEGA, openings, rho=RHO, g=G)
    assert sol.converged.all()
    best = int(np.nanargmax(sol.efficiency))
    assert 0.93 <= sol.efficiency[best] <= 0.95
    assert 0.8 <= sol.flow[best] / 17.9 <= 1.0
    # the design opening passes the shock-free, swirl-free flow at the design head
    at_design = MODEL.solve(HEAD, OMEGA, DESIGN_OPENING, rho=RHO, g=G)
    assert float(at_design.runner_flow) == pytest.approx(
        OMEGA * EXAMPLE.design_flow_coefficient, rel=1e-9)
    # part load costs efficiency: at half the best flow at least 3 points less
    half = np.interp(0.5 * sol.flow[best], sol.flow, sol.efficiency)
    assert half < sol.efficiency[best] - 0.03


def test_zero_opening_gives_zero_flow_and_nan_efficiency() -> None:
    sol = MODEL.solve(HEAD, OMEGA, np.array([0.0, 0.5]), rho=RHO, g=G)
    assert sol.flow[0] == 0.0 and sol.runner_flow[0] == 0.0
    assert math.isnan(sol.efficiency[0]) and sol.converged[0]
    # the spinning runner still costs disc friction and bearing power
    assert sol.shaft_power[0] == pytest.approx(-(sol.losses["disc"][0]
                                                 + sol.losses["bearing"][0]))
    assert sol.balance_residual()[0] == 0.0
    assert sol.flow[1] > 0 and 0 < sol.efficiency[1] < 1


def test_bad_inputs_give_nan_not_exceptions() -> None:
    sol = MODEL.solve(np.array([np.nan, HEAD, -10.0, HEAD]), OMEGA,
                      np.array([0.5, np.nan, 0.5, 3.0]))
    assert not sol.converged.any()
    assert np.isnan(sol.flow).all() and np.isnan(sol.efficiency).all()


def test_leakage_follows_the_orifice_law_and_costs_efficiency() -> None:
    sol = MODEL.solve(HEAD, OMEGA, 0.7, rho=RHO, g=G)
    s = MODEL.state(sol.runner_flow, OMEGA, 0.7)
    # orifice law (common practice): q = C_d A sqrt(2 (E - c1^2/2))
    q_leak = COEFFS["leakage"] * EXAMPLE.seal_area * math.sqrt(
        2.0 * (G * HEAD - 0.5 * float(s.inlet.c) ** 2))
    assert float(sol.flow - sol.runner_flow) == pytest.approx(q_leak, rel=1e-9)
    assert float(sol.losses["leakage"]) == pytest.approx(RHO * q_leak * G * HEAD, rel=1e-9)
    worn = MODEL.with_coefficients({"leakage": 3 * COEFFS["leakage"]}).solve(
        HEAD, OMEGA, 0.7, rho=RHO, g=G)
    assert worn.efficiency < sol.efficiency and worn.flow > sol.flow


def test_vectorised_broadcasting_shapes() -> None:
    heads = np.linspace(400, 600, 5)[:, None]
    openings = np.linspace(0.2, 1.0, 4)[None, :]
    sol = MODEL.solve(heads, OMEGA, openings)
    assert sol.flow.shape == sol.efficiency.shape == (5, 4)
    assert all(v.shape == (5, 4) for v in sol.losses.values())


heads = st.floats(min_value=300.0, max_value=700.0)
n11_ratio = st.floats(min_value=0.85, max_value=1.15)  # speed factor at equal n11
openings = st.floats(min_value=0.1, max_value=1.0)
scale = st.floats(min_value=0.5, max_value=2.0)


def _speed(head: float, ratio: float) -> float:
    # n11 = n D / sqrt(H): the speed with the design n11 at this head, times ratio
    return OMEGA * ratio * math.sqrt(head / HEAD)


@SETTINGS
@given(head=heads, ratio=n11_ratio, y=openings, f=scale)
def test_energy_balance_closes_to_round_off(head: float, ratio: float, y: float, f: float
                                            ) -> None:
    # base.py contract: P_h = P_shaft + sum(losses), with any admissible coefficients
    bounds = MODEL.coefficient_bounds()
    model = MODEL.with_coefficients(
        {n: min(f * v, bounds[n][1]) for n, v in COEFFS.items()})
    sol = model.solve(head, _speed(head, ratio), y, rho=RHO, g=G)
    assert sol.converged
    assert abs(float(sol.balance_residual())) <= 1e-12 * float(sol.hydraulic_power)
    # and the root satisfies E = Y + sum of specific losses of the runner flow
    hydraulic = sum(float(sol.losses[n]) for n in
                    ("incidence", "distributor", "friction", "draft_tube", "swirl"))
    specific = float(sol.runner_work) + hydraulic / (RHO * float(sol.runner_flow))
    assert specific == pytest.approx(float(sol.specific_energy), rel=1e-12)


@SETTINGS
@given(head=heads, ratio=n11_ratio, y=openings)
def test_efficiency_between_zero_and_one_over_the_operating_range(
        head: float, ratio: float, y: float) -> None:
    sol = MODEL.solve(head, _speed(head, ratio), y)
    assert 0.0 < float(sol.efficiency) < 1.0


@SETTINGS
@given(head=heads, speed_rpm=st.floats(min_value=300.0, max_value=1000.0), y=openings)
def test_loss_free_runner_converts_all_of_the_energy(head: float, speed_rpm: float, y: float
                                                     ) -> None:
    # "loss-free": every coefficient zero, i.e. ideal distributor and runner, no leakage,
    # no mechanical loss, and an ideal draft tube recovering the whole outlet kinetic
    # energy, swirl included. Then Y = E (Euler) and eta = 1, also off design where the
    # flow enters with incidence and leaves with swirl.
    model = FrancisModel(EXAMPLE, LOSS_FREE)
    sol = model.solve(head, speed_rpm * RPM, y, rho=RHO, g=G)
    assert sol.converged
    assert float(sol.runner_work) == pytest.approx(G * head, rel=1e-12)
    assert float(sol.efficiency) == pytest.approx(1.0, rel=1e-12)
    assert float(sol.flow) == float(sol.runner_flow)


@SETTINGS
@given(head=heads, ratio=n11_ratio, y=openings, s=st.floats(min_value=0.3, max_value=3.0))
def test_affinity_laws_at_equal_n11_and_opening(head: float, ratio: float, y: float,
                                                s: float) -> None:
    # Similarity (IEC 60193 unit quantities n11, Q11, P11): the same n11 and opening on the
    # same runner give Q ~ H^0.5 and P ~ H^1.5 at equal efficiency, when every loss scales
    # with the velocity head. Disc friction (rho omega^3 R^5) does; the bearing loss
    # (omega^2) does not, so it is switched off here and tested below.
    model = MODEL.with_coefficients({"bearing": 0.0})
    a = model.solve(head, _speed(head, ratio), y)
    b = model.solve(s * head, _speed(s * head, ratio), y)
    assert float(b.flow) == pytest.approx(float(a.flow) * s**0.5, rel=1e-9)
    assert float(b.shaft_power) == pytest.approx(float(a.shaft_power) * s**1.5, rel=1e-9)
    assert float(b.efficiency) == pytest.approx(float(a.efficiency), rel=1e-9)


def test_bearing_loss_breaks_similarity_in_the_expected_direction() -> None:
    # omega^2 bearing loss falls relative to omega^3 power: higher head, higher efficiency
    low = MODEL.solve(HEAD / 2, _speed(HEAD / 2, 1.0), 0.7)
    high = MODEL.solve(HEAD * 1.2, _speed(HEAD * 1.2, 1.0), 0.7)
    assert high.efficiency > low.efficiency


@SETTINGS
@given(head=heads, ratio=n11_ratio, y1=openings, y2=openings)
def test_flow_rises_with_opening(head: float, ratio: float, y1: float, y2: float) -> None:
    if abs(y1 - y2) < 1e-6:
        y2 = y1 - 1e-3
    sol = MODEL.solve(head, _speed(head, ratio), np.array([y1, y2]))
    assert (sol.flow[1] - sol.flow[0]) * (y2 - y1) > 0


@SETTINGS
@given(head=heads, ratio=n11_ratio, y=openings)
def test_flow_rises_with_head_at_fixed_speed(head: float, ratio: float, y: float) -> None:
    # the physical (falling-branch) root: dQ/dE > 0 at fixed speed and opening
    speed = _speed(HEAD, ratio)
    sol = MODEL.solve(np.array([head, head * 1.01]), speed, y)
    assert sol.flow[1] > sol.flow[0]
