"""Pelton model: a textbook bucket step by step, the U/c1 optimum, balance, similarity."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analytics.runners.base import RunnerModel
from analytics.runners.pelton import (
    COEFFICIENT_NAMES,
    PeltonGeometry,
    PeltonModel,
    design_coefficients,
)
from analytics.triangles import euler_work_of

RHO = 1000.0
G = 9.81
RPM = 2.0 * math.pi / 60.0

# The lead's plant-file example: D = 1.45 m, 6 jets, 0.18 m nozzles, 165 deg, 600 rpm, 500 m
EXAMPLE = PeltonGeometry(pitch_diameter=1.45, jet_count=6, nozzle_diameter=0.18,
                         bucket_outlet_angle=math.radians(165.0))
OMEGA = 600.0 * RPM
HEAD = 500.0
COEFFS = design_coefficients(EXAMPLE, speed=OMEGA, head=HEAD, rho=RHO, g=G)
MODEL = PeltonModel(EXAMPLE, COEFFS)
LOSS_FREE = {name: 0.0 for name in COEFFICIENT_NAMES}

SETTINGS = settings(max_examples=60, deadline=None)


def test_is_a_runner_model_with_bounded_coefficients() -> None:
    assert isinstance(MODEL, RunnerModel)
    assert MODEL.runner_type == "pelton"
    bounds = MODEL.coefficient_bounds()
    for name, value in COEFFS.items():
        assert bounds[name][0] <= value <= bounds[name][1], name
    assert MODEL.with_coefficients({"bucket": 0.2}).velocity_ratio == pytest.approx(
        math.sqrt(0.8))
    with pytest.raises(KeyError):
        MODEL.with_coefficients({"needle": 0.1})
    with pytest.raises(ValueError):
        MODEL.with_coefficients({"bucket": 1.5})


def test_textbook_pelton_step_by_step() -> None:
    # R.K. Bansal, "A Textbook of Fluid Mechanics and Hydraulic Machines", ch. 18, first
    # Pelton-wheel problem (from memory): bucket speed 10 m/s, 700 l/s, head 30 m, jet
    # deflected through 160 deg, Cv 0.98. Book answers (from memory): V1 = 23.77 m/s,
    # power to the runner 186.97 kW, hydraulic efficiency 94.54 % (on the jet energy
    # V1^2/2). The book rounds V1 to 23.77 m/s, hence rel=1e-3 on the power.
    cv = 0.98
    c1 = cv * math.sqrt(2 * G * 30.0)
    d_jet = math.sqrt(4 * 0.7 / (math.pi * c1))  # the jet that carries 700 l/s
    geo = PeltonGeometry(pitch_diameter=1.0, jet_count=1, nozzle_diameter=d_jet,
                         bucket_outlet_angle=math.radians(160.0))
    model = PeltonModel(geo, dict(LOSS_FREE, nozzle=1 / cv**2 - 1))
    assert model.velocity_coefficient == pytest.approx(cv, rel=1e-12)
    speed = 10.0 / 0.5  # U = omega D/2 = 10 m/s
    sol = model.solve(30.0, speed, 1.0, rho=RHO, g=G)
    assert float(model.jet_speed(30.0, G)) == pytest.approx(23.77, abs=0.01)
    assert float(sol.flow) == pytest.approx(0.7, rel=1e-12)
    # Euler work from the triangles equals the model's work, 10 (V1 - 10)(1 - cos 160)
    inlet, outlet = model.triangles(30.0, speed, G)
    assert float(inlet.u) == pytest.approx(10.0)
    assert -float(outlet.c_theta) == pytest.approx(2.94, abs=0.01)  # Vw2 (from memory)
    work = float(euler_work_of(inlet, outlet))
    assert float(sol.runner_work) == pytest.approx(work, rel=1e-12)
    assert work == pytest.approx(10.0 * (c1 - 10.0) * (1 - math.cos(math.radians(160))))
    assert float(sol.shaft_power) == pytest.approx(186.97e3, rel=1e-3)
    assert work / (0.5 * c1**2) == pytest.approx(0.9454, abs=2e-4)
    # turbine efficiency on g H includes the nozzle: 0.9454 * Cv^2
    assert float(sol.efficiency) == pytest.approx(work / (0.5 * c1**2) * cv**2, rel=1e-12)
    assert float(sol.losses["nozzle"]) == pytest.approx(RHO * 0.7 * G * 30 * (1 - cv**2),
                                                        rel=1e-12)
    # the exit kinetic energy is the balance of the jet energy (no bucket friction)
    c2_sq = float(outlet.c) ** 2
    assert float(sol.losses["exit"]) == pytest.approx(RHO * 0.7 * c2_sq / 2, rel=1e-12)


def test_loss_free_bucket_optimum_at_half_the_jet_speed() -> None:
    # Dixon & Hall ch. 9 (Pelton wheel): Y = U (c1 - U)(1 - k cos beta2) peaks at
    # U = c1/2 with Y = c1^2/4 (1 - k cos beta2), for any constant k.
    for bucket in (0.0, 0.1, 0.3):
        model = PeltonModel(EXAMPLE, dict(LOSS_FREE, bucket=bucket))
        c1 = float(model.jet_speed(HEAD, G))
        x = np.linspace(0.3, 0.7, 4001)
        speeds = x * c1 / (EXAMPLE.pitch_diameter / 2)
        sol = model.solve(HEAD, speeds, 1.0, rho=RHO, g=G)
        best = int(np.argmax(sol.efficiency))
        assert x[best] == pytest.approx(0.5, abs=1e-4)
        k = math.sqrt(1 - bucket)
        y_max = c1**2 / 4 * (1 - k * math.cos(EXAMPLE.bucket_outlet_angle))
        assert float(sol.runner_work[best]) == pytest.approx(y_max, rel=1e-7)


def test_full_u_turn_converts_everything_at_half_jet_speed() -> None:
    # analytic: beta2 = 180 deg, k = 1, Cv = 1, U = c1/2 leaves c2 = 0, so Y = E.
    # With beta2 = 165 deg the best is (1 - cos 165 deg)/2 = 0.98296.
    for angle, expected in ((180.0, 1.0), (165.0, (1 - math.cos(math.radians(165))) / 2)):
        geo = PeltonGeometry(pitch_diameter=1.45, jet_count=6, nozzle_diameter=0.18,
                             bucket_outlet_angle=math.radians(angle))
        model = PeltonModel(geo, LOSS_FREE)
        c1 = math.sqrt(2 * G * HEAD)
        sol = model.solve(HEAD, 0.5 * c1 / 0.725, 1.0, rho=RHO, g=G)
        assert float(sol.efficiency) == pytest.approx(expected, rel=1e-12)
    assert (1 - math.cos(math.radians(165))) / 2 == pytest.approx(0.98296, abs=1e-5)


def test_typical_coefficients_land_at_a_realistic_best_point() -> None:
    # domain primer section 3: a large Pelton peaks at 0.90-0.92; windage (omega^3) moves
    # the best U/c1 below the loss-free 0.5 (in practice about 0.46-0.48)
    c1 = float(MODEL.jet_speed(HEAD, G))
    assert MODEL.velocity_coefficient == pytest.approx(0.985, abs=1e-3)
    rated = MODEL.solve(HEAD, OMEGA, np.linspace(0.05, 1.0, 96), rho=RHO, g=G)
    assert 0.90 <= np.nanmax(rated.efficiency) <= 0.92
    x = np.linspace(0.35, 0.6, 2501)
    sol = MODEL.solve(HEAD, x * c1 / 0.725, 1.0, rho=RHO, g=G)
    best = x[int(np.argmax(sol.efficiency))]
    assert 0.45 < best < 0.5
    # the rated 600 rpm at 500 m runs at U/c1 = 0.467
    assert OMEGA * 0.725 / c1 == pytest.approx(0.467, abs=1e-3)


def test_no_flow_gives_nan_efficiency_and_bad_jets_nan() -> None:
    sol = MODEL.solve(HEAD, OMEGA, np.array([0.0, 0.5, 0.5, 0.5, 1.2]),
                      jets=np.array([6, 0, 7, 2.5, 6]))
    assert sol.flow[0] == 0.0 and math.isnan(sol.efficiency[0]) and sol.converged[0]
    assert sol.flow[1] == 0.0 and math.isnan(sol.efficiency[1]) and sol.converged[1]
    assert sol.shaft_power[0] == pytest.approx(-(sol.losses["windage"][0]
                                                 + sol.losses["bearing"][0]))
    assert not sol.converged[2:].any() and np.isnan(sol.flow[2:]).all()


def test_flow_is_linear_in_stroke_and_jets() -> None:
    # the linear-in-stroke law (common practice) and one flow per active jet
    sol = MODEL.solve(HEAD, OMEGA, np.array([0.25, 0.5, 1.0]), jets=np.array([[1], [3]]))
    c1 = float(MODEL.jet_speed(HEAD))
    area = math.pi * 0.18**2 / 4
    np.testing.assert_allclose(sol.flow, np.array([[1], [3]]) * np.array([0.25, 0.5, 1.0])
                               * area * c1, rtol=1e-12)


heads = st.floats(min_value=200.0, max_value=900.0)
ratios = st.floats(min_value=0.35, max_value=0.6)  # U / c1
strokes = st.floats(min_value=0.05, max_value=1.0)
jet_counts = st.integers(min_value=1, max_value=6)


def _speed(model: PeltonModel, head: float, ratio: float) -> float:
    return ratio * float(model.jet_speed(head, G)) / (EXAMPLE.pitch_diameter / 2)


@SETTINGS
@given(head=heads, ratio=ratios, y=strokes, jets=jet_counts,
       f=st.floats(min_value=0.0, max_value=3.0))
def test_energy_balance_closes_to_round_off(head: float, ratio: float, y: float, jets: int,
                                            f: float) -> None:
    model = MODEL.with_coefficients({n: min(f * v, MODEL.coefficient_bounds()[n][1])
                                     for n, v in COEFFS.items()})
    sol = model.solve(head, _speed(model, head, ratio), y, jets=jets, rho=RHO, g=G)
    assert abs(float(sol.balance_residual())) <= 1e-12 * float(sol.hydraulic_power)


@SETTINGS
@given(head=heads, ratio=ratios, y=st.floats(min_value=0.2, max_value=1.0), jets=jet_counts)
def test_efficiency_between_zero_and_one(head: float, ratio: float, y: float, jets: int
                                         ) -> None:
    # operating range: every active jet at 20 % stroke or more (common practice; below a
    # few per cent of full load the fixed windage and bearing losses eat all the power)
    sol = MODEL.solve(head, _speed(MODEL, head, ratio), y, jets=jets, rho=RHO, g=G)
    assert 0.0 < float(sol.efficiency) < 1.0


@SETTINGS
@given(head=heads, ratio=ratios, y=strokes)
def test_loss_free_runner_loses_only_the_exit_energy(head: float, ratio: float, y: float
                                                     ) -> None:
    # "loss-free" Pelton: Cv = 1, k = 1, no windage or bearing loss. The water still leaves
    # the bucket with c2, so Y + c2^2/2 = E exactly (Dixon & Hall ch. 9).
    model = PeltonModel(EXAMPLE, LOSS_FREE)
    speed = _speed(model, head, ratio)
    sol = model.solve(head, speed, y, rho=RHO, g=G)
    _, outlet = model.triangles(head, speed, G)
    assert float(sol.runner_work) + 0.5 * float(outlet.c) ** 2 == pytest.approx(G * head,
                                                                              rel=1e-12)
    assert float(sol.shaft_power) == pytest.approx(float(sol.hydraulic_power)
                                                   - float(sol.losses["exit"]), rel=1e-12)


@SETTINGS
@given(head=heads, ratio=ratios, y=strokes, s=st.floats(min_value=0.3, max_value=3.0))
def test_affinity_laws_at_equal_n11_and_stroke(head: float, ratio: float, y: float, s: float
                                               ) -> None:
    # IEC 60193 similarity: equal n11 (equal U/c1) and stroke give Q ~ H^0.5, P ~ H^1.5 and
    # equal efficiency; windage (omega^3) scales, the omega^2 bearing loss would not.
    model = MODEL.with_coefficients({"bearing": 0.0})
    a = model.solve(head, _speed(model, head, ratio), y)
    b = model.solve(s * head, _speed(model, s * head, ratio), y)
    assert float(b.flow) == pytest.approx(float(a.flow) * s**0.5, rel=1e-9)
    assert float(b.shaft_power) == pytest.approx(float(a.shaft_power) * s**1.5, rel=1e-9)
    assert float(b.efficiency) == pytest.approx(float(a.efficiency), rel=1e-9)


@SETTINGS
@given(head=heads, y1=strokes, y2=strokes)
def test_flow_rises_with_stroke(head: float, y1: float, y2: float) -> None:
    if abs(y1 - y2) < 1e-6:
        y2 = y1 - 1e-3
    sol = MODEL.solve(head, OMEGA, np.array([y1, y2]))
    assert (sol.flow[1] - sol.flow[0]) * (y2 - y1) > 0
