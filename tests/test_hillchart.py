"""Hill chart: interpolated lookups against a direct solve, edges, Pelton envelope, BEP, storage.

The chart is a resampled, interpolated copy of a runner model, so most checks here compare it
with the same model solved directly at the same operating state: they test the resampling and
interpolation, not the physics (that is tests/test_francis.py and tests/test_pelton.py).
Interpolation tolerances were measured on 50,000 random states (seeds 1 and 2, not the seed
used below) with the default grids (50 openings, 49 loads) and 21 heads, and set a little
above the largest error seen; the value measured is given beside each bound.
"""

from __future__ import annotations

import json
import math
import time

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from analytics.hillchart import DEFAULT_LOADS, HillChart, build_hill_chart
from analytics.runners.francis import FrancisGeometry, FrancisModel
from analytics.runners.francis import design_coefficients as francis_coefficients
from analytics.runners.pelton import PeltonGeometry, PeltonModel
from analytics.runners.pelton import design_coefficients as pelton_coefficients

RHO = 1000.0
G = 9.81
RPM = 2.0 * math.pi / 60.0

# The lead's plant-file examples (as in tests/test_francis.py and tests/test_pelton.py).
FRANCIS_GEOMETRY = FrancisGeometry(inlet_radius=0.93, inlet_height=0.16, outlet_radius=0.56,
                                   blade_inlet_angle=math.radians(-26.0),
                                   blade_outlet_angle=math.radians(-76.6), outlet_area=1.70)
FRANCIS_SPEED = 750.0 * RPM
FRANCIS_COEFFS = francis_coefficients(FRANCIS_GEOMETRY, speed=FRANCIS_SPEED, head=500.0,
                                      rho=RHO, g=G)
FRANCIS = FrancisModel(FRANCIS_GEOMETRY, FRANCIS_COEFFS)
HEADS = np.linspace(400.0, 600.0, 21)

PELTON_GEOMETRY = PeltonGeometry(pitch_diameter=1.45, jet_count=6, nozzle_diameter=0.18,
                                 bucket_outlet_angle=math.radians(165.0))
PELTON_SPEED = 600.0 * RPM
PELTON = PeltonModel(PELTON_GEOMETRY, pelton_coefficients(PELTON_GEOMETRY, speed=PELTON_SPEED,
                                                          head=500.0, rho=RHO, g=G))
MODES = (1, 2, 3, 4, 5, 6)

SEED = 20240601


@pytest.fixture(scope="module")
def francis_chart() -> HillChart:
    return build_hill_chart(FRANCIS, heads=HEADS, speed=FRANCIS_SPEED, rho=RHO, g=G)


@pytest.fixture(scope="module")
def pelton_chart() -> HillChart:
    return build_hill_chart(PELTON, heads=HEADS, speed=PELTON_SPEED, modes=MODES, rho=RHO, g=G)


def _max_power_at(chart: HillChart, head: np.ndarray) -> np.ndarray:
    """P_max(H) as the chart interpolates it (P_max / H^1.5 linear in H)."""
    return np.interp(head, chart.heads, chart.max_power / chart.heads**1.5) * head**1.5


# ---------------------------------------------------------------- the grid rows themselves

def test_grid_rows_are_the_model_solved_directly(francis_chart: HillChart) -> None:
    # Step by step at the grid heads, where no head interpolation is involved.
    sol = FRANCIS.solve(HEADS[:, None], FRANCIS_SPEED, np.linspace(0.02, 1.0, 50)[None, :],
                        rho=RHO, g=G)
    # intermediate quantity 1: P_max and Q_max are the largest solved power and flow
    np.testing.assert_allclose(francis_chart.max_power, sol.shaft_power.max(axis=1), rtol=1e-12)
    np.testing.assert_allclose(francis_chart.max_flow, sol.flow.max(axis=1), rtol=1e-12)
    # the Francis power rises with opening up to full opening, so load 1 is opening 1
    assert np.all(np.diff(sol.shaft_power, axis=1) > 0)
    np.testing.assert_allclose(francis_chart.opening_by_power[:, -1], 1.0, rtol=1e-12)
    np.testing.assert_allclose(francis_chart.eta_by_power[:, -1], sol.efficiency[:, -1],
                               rtol=1e-12)
    # intermediate quantity 2: each row is the solved (power, efficiency, opening, flow)
    # curve resampled linearly at loads * P_max (np.interp as the independent reference)
    targets = francis_chart.loads[None, :] * francis_chart.max_power[:, None]
    for i in range(HEADS.size):
        p_row = sol.shaft_power[i]
        for table, column in ((francis_chart.eta_by_power, sol.efficiency[i]),
                              (francis_chart.opening_by_power, np.linspace(0.02, 1.0, 50)),
                              (francis_chart.flow_by_power, sol.flow[i])):
            expected = np.interp(targets[i], p_row, column, left=np.nan)
            np.testing.assert_allclose(table[i], expected, rtol=1e-12)
    # on a grid head and load the lookup returns the table value itself
    power = targets[:, 30]
    np.testing.assert_allclose(francis_chart.efficiency_at_power(power, HEADS),
                               francis_chart.eta_by_power[:, 30], rtol=1e-12)
    # a Francis chart has no operating modes: 0 inside the chart
    assert np.all(francis_chart.mode_at_power(power, HEADS) == 0)


def test_rejects_a_head_grid_that_is_not_ascending() -> None:
    with pytest.raises(ValueError, match="ascending"):
        build_hill_chart(FRANCIS, heads=[500.0, 450.0], speed=FRANCIS_SPEED)
    with pytest.raises(ValueError, match="ascending"):
        build_hill_chart(FRANCIS, heads=[500.0], speed=FRANCIS_SPEED)


# ---------------------------------------------------------------- lookups vs a direct solve

def test_francis_lookups_agree_with_a_direct_solve(francis_chart: HillChart) -> None:
    rng = np.random.default_rng(SEED)
    head = rng.uniform(400.0, 600.0, 5000)
    # up to 0.98: between grid heads the interpolated P_max(H) is off by up to 1e-4 (measured
    # 9.9e-5), so a state at exactly full opening may read as load 1.0001 -> NaN
    opening = rng.uniform(0.05, 0.98, head.size)
    sol = FRANCIS.solve(head, FRANCIS_SPEED, opening, rho=RHO, g=G)
    load = sol.shaft_power / _max_power_at(francis_chart, head)
    eta_p = francis_chart.efficiency_at_power(sol.shaft_power, head)
    eta_q = francis_chart.efficiency_at_flow(sol.flow, head)
    y = francis_chart.opening_at_power(sol.shaft_power, head)
    q = francis_chart.flow_at_power(sol.shaft_power, head)
    for values in (eta_p, eta_q, y, q):
        assert np.isfinite(values).all()
    upper = load >= 0.2
    assert upper.sum() > 3000 and (~upper).sum() > 300
    # load >= 0.2: the curves are gentle; bilinear error (measured 2.6e-4, 3.1e-4, 4.6e-4,
    # 2.7e-4 over 50,000 states)
    assert np.max(np.abs(eta_p - sol.efficiency)[upper]) < 3.5e-4
    assert np.max(np.abs(eta_q - sol.efficiency)[upper]) < 3.5e-4
    assert np.max(np.abs(y - opening)[upper]) < 5.5e-4
    assert np.max(np.abs(q / sol.flow - 1.0)[upper]) < 3.5e-4
    # loads 0.05-0.2: efficiency climbs steeply with load (0.6 -> 0.8) and the chart's
    # 2 %-of-opening grid cannot follow its curvature (measured 5.4e-3, 4.0e-3, 7.9e-5,
    # 1.5e-3): documented here, not hidden.
    low = ~upper
    assert np.max(np.abs(eta_p - sol.efficiency)[low]) < 6.5e-3
    assert np.max(np.abs(eta_q - sol.efficiency)[low]) < 5.0e-3
    assert np.max(np.abs(y - opening)[low]) < 1.0e-4
    assert np.max(np.abs(q / sol.flow - 1.0)[low]) < 1.6e-3


def _pelton_direct(power: np.ndarray, head: np.ndarray, jets: int) -> np.ndarray:
    """Efficiency of the Pelton model delivering ``power`` with ``jets`` jets, solved directly.

    The model's flow is ``jets * stroke * A_jet * c1`` and the work per kilogram does not
    depend on the stroke (analytics/runners/pelton.py), so the shaft power is affine in the
    stroke: two solves (stroke 0 and 1) give the stroke for a power exactly.
    """
    p0 = PELTON.solve(head, PELTON_SPEED, 0.0, jets=jets, rho=RHO, g=G).shaft_power
    p1 = PELTON.solve(head, PELTON_SPEED, 1.0, jets=jets, rho=RHO, g=G).shaft_power
    stroke = (power - p0) / (p1 - p0)
    eta = PELTON.solve(head, PELTON_SPEED, np.clip(stroke, 0.0, 1.0), jets=jets,
                       rho=RHO, g=G).efficiency
    return np.where((stroke > 0) & (stroke <= 1.0), eta, np.nan)


def test_pelton_lookups_agree_with_a_direct_solve(pelton_chart: HillChart) -> None:
    rng = np.random.default_rng(SEED)
    head = rng.uniform(400.0, 600.0, 4000)
    jets = rng.integers(1, 7, head.size)
    stroke = rng.uniform(0.05, 0.98, head.size)
    sol = PELTON.solve(head, PELTON_SPEED, stroke, jets=jets, rho=RHO, g=G)
    load = sol.shaft_power / _max_power_at(pelton_chart, head)
    keep = load >= 0.05  # one jet at a small stroke is below the chart's first load (0.04)
    head, stroke, jets, load = head[keep], stroke[keep], jets[keep], load[keep]
    sol = PELTON.solve(head, PELTON_SPEED, stroke, jets=jets, rho=RHO, g=G)
    inside = load >= 0.2
    eta = pelton_chart.efficiency_at_power(sol.shaft_power, head)
    # measured 1.4e-4 at loads >= 0.2 (the state's own jet count need not be the chart's:
    # in this model every jet count gives the same efficiency at a power, see below)
    assert np.max(np.abs(eta - sol.efficiency)[inside]) < 2.0e-4
    # the chart's stroke and jet count belong together: running them gives the power back
    # (measured 6.2e-5; before the fix in opening_at_power this was up to 0.5 where
    # neighbouring grid points ran different jet counts)
    y = pelton_chart.opening_at_power(sol.shaft_power, head)
    mode = pelton_chart.mode_at_power(sol.shaft_power, head)
    assert np.all((mode >= 1) & (mode <= 6)) and np.all((y > 0) & (y <= 1.0))
    again = PELTON.solve(head, PELTON_SPEED, y, jets=mode, rho=RHO, g=G)
    assert np.max(np.abs(again.shaft_power / sol.shaft_power - 1.0)[inside]) < 1.0e-4
    assert np.max(np.abs(again.shaft_power / sol.shaft_power - 1.0)) < 2.0e-4
    np.testing.assert_allclose(pelton_chart.flow_at_power(sol.shaft_power, head)[inside],
                               sol.flow[inside], rtol=2.0e-4)


# ---------------------------------------------------------------- edges, NaN, vectorisation

def test_nan_outside_the_chart_and_for_nan_inputs(francis_chart: HillChart,
                                                  pelton_chart: HillChart) -> None:
    for chart in (francis_chart, pelton_chart):
        p_mid = 0.6 * chart.max_power[10]
        lookups = (chart.efficiency_at_power, chart.opening_at_power, chart.flow_at_power)
        for f in lookups:
            assert np.isfinite(f(p_mid, 500.0))
            assert np.isnan(f(p_mid, 399.9))  # head below the chart
            assert np.isnan(f(p_mid, 600.1))  # head above the chart
            assert np.isnan(f(1.001 * chart.max_power[10], HEADS[10]))  # above P_max
            assert np.isfinite(f(chart.max_power[10], HEADS[10]))  # P_max itself is inside
            assert np.isnan(f(0.99 * DEFAULT_LOADS[0] * chart.max_power[10], HEADS[10]))
            assert np.isnan(f(-1.0e6, 500.0))
            assert np.isnan(f(np.nan, 500.0))
            assert np.isnan(f(p_mid, np.nan))
            assert np.isnan(f(np.inf, 500.0))
        assert np.isnan(chart.efficiency_at_flow(1.001 * chart.max_flow[0], HEADS[0]))
        assert np.isnan(chart.efficiency_at_flow(5.0, 650.0))
        assert np.isnan(chart.efficiency_at_flow(np.nan, 500.0))
        # mode: -1 exactly where the chart has no value (outside head range included)
        modes = chart.mode_at_power([p_mid, p_mid, p_mid, np.nan, 2 * chart.max_power[-1]],
                                    [500.0, 300.0, 650.0, 500.0, 600.0])
        assert modes[0] >= 0 and np.all(modes[1:] == -1)


def test_inputs_broadcast_and_keep_their_shape(francis_chart: HillChart) -> None:
    p = np.full((3, 4), 0.5 * francis_chart.max_power[10])
    assert francis_chart.efficiency_at_power(p, 500.0).shape == (3, 4)
    assert francis_chart.efficiency_at_power(p, np.full(4, 500.0)).shape == (3, 4)
    assert np.ndim(francis_chart.efficiency_at_power(p[0, 0], 500.0)) == 0
    # one vectorised call equals the point-by-point answers
    rng = np.random.default_rng(SEED)
    head = rng.uniform(395.0, 605.0, 50)
    power = rng.uniform(-0.1, 1.1, 50) * _max_power_at(francis_chart, head)
    batch = francis_chart.efficiency_at_power(power, head)
    single = [francis_chart.efficiency_at_power(pk, hk) for pk, hk in zip(power, head,
                                                                              strict=True)]
    np.testing.assert_array_equal(batch, np.array(single, dtype=float))


def test_a_million_points_in_well_under_a_second_each(pelton_chart: HillChart) -> None:
    rng = np.random.default_rng(SEED)
    head = rng.uniform(380.0, 620.0, 1_000_000)
    power = rng.uniform(-0.05, 1.1, head.size) * _max_power_at(pelton_chart, head)
    power[::1000] = np.nan
    for f in (pelton_chart.efficiency_at_power, pelton_chart.opening_at_power,
              pelton_chart.flow_at_power, pelton_chart.mode_at_power):
        start = time.perf_counter()
        out = f(power, head)
        elapsed = time.perf_counter() - start
        # measured 0.1-0.35 s per call here; 2 s leaves room for a slower CI machine
        assert elapsed < 2.0, (f.__name__, elapsed)
        assert out.shape == head.shape
        missing = (out == -1) if out.dtype.kind == "i" else np.isnan(out)
        assert missing[::1000].all()
        assert 0.1 < missing.mean() < 0.4  # heads and loads beyond the chart are NaN


# ---------------------------------------------------------------- Pelton: envelope over jets

def test_pelton_envelope_over_jet_counts(pelton_chart: HillChart) -> None:
    head = np.full(4, 500.0)
    p_max = float(_max_power_at(pelton_chart, np.array([500.0]))[0])
    power = np.array([0.06, 0.3, 0.7, 1.0]) * p_max
    singles = {k: build_hill_chart(PELTON, heads=HEADS, speed=PELTON_SPEED, modes=[k],
                                   rho=RHO, g=G) for k in MODES}
    envelope = pelton_chart.efficiency_at_power(power, head)
    assert np.isfinite(envelope).all()
    for k, chart in singles.items():
        single = chart.efficiency_at_power(power, head)
        reachable = np.isfinite(single)
        assert np.all(envelope[reachable] >= single[reachable] - 1e-12), k
        # the flow, and so P + P_mech, is proportional to the number of jets at full
        # stroke (P_mech = windage + bearing, the shaft power at zero stroke with the sign
        # turned)
        p_mech = -float(PELTON.solve(500.0, PELTON_SPEED, 0.0, rho=RHO, g=G).shaft_power)
        assert chart.max_power[10] + p_mech == pytest.approx(
            k / 6 * (pelton_chart.max_power[10] + p_mech), rel=1e-12)
        # a direct solve for that jet count, where it can deliver the power
        direct = _pelton_direct(power, head, k)
        assert np.array_equal(np.isfinite(direct), reachable)
        error = np.abs(single - direct)
        # measured 3.3e-3 at 6 % load (a single-mode chart resolves its own range only,
        # steep there) and below 2e-5 above it
        assert error[0] < 4e-3 and np.all(error[1:][reachable[1:]] < 5e-5), (k, error)
        # the envelope holds the best-resolved mode: measured 2.8e-5 from the direct value
        assert np.all(np.abs(envelope - direct)[reachable] < 1e-4), k
    # at low power fewer jets than at full power; full power needs all six
    modes = pelton_chart.mode_at_power(power, head)
    assert modes[-1] == 6
    assert modes[0] < modes[-1]
    assert np.isnan(singles[5].efficiency_at_power(power[-1], 500.0))
    # A finding about the model, not the chart: its efficiency at a given power is the same
    # for every jet count (work per kg independent of stroke, mechanical losses fixed), so
    # the chart's jet count at part load is decided by interpolation error (fewer jets
    # resolve the power finer), not by physics. Shown here so that a model change which
    # makes jet switching matter is noticed.
    direct_all = np.array([_pelton_direct(power[:1], head[:1], k)[0] for k in MODES])
    assert np.ptp(direct_all) < 1e-12


# ---------------------------------------------------------------- best-efficiency point

@pytest.mark.parametrize("head", [400.0, 505.0, 600.0])
def test_bep_is_a_maximum_inside_the_chart(francis_chart: HillChart, head: float) -> None:
    bep = francis_chart.best_efficiency_point(head)
    p_max = float(_max_power_at(francis_chart, np.array([head]))[0])
    assert bep.head == head
    assert DEFAULT_LOADS[0] * p_max < bep.power < p_max
    assert 0.0 < bep.opening < 1.0
    assert bep.flow == pytest.approx(float(francis_chart.flow_at_power(bep.power, head)))
    # nearby loads have a lower efficiency, on the chart and in the model itself. The true
    # maximum lies up to half a load step (1 % of P_max) from the chart's BEP, so the
    # neighbours checked are 3 % and 5 % away (at 2 %, one step, the chart may be flat to 3e-7)
    around = bep.power + np.array([-0.05, -0.03, 0.03, 0.05]) * p_max
    assert np.all(francis_chart.efficiency_at_power(around, head) < bep.efficiency)
    near = FRANCIS.solve(head, FRANCIS_SPEED, bep.opening + np.array([-0.05, 0.05]),
                         rho=RHO, g=G)
    at = FRANCIS.solve(head, FRANCIS_SPEED, bep.opening, rho=RHO, g=G)
    assert np.all(near.efficiency < at.efficiency)
    # against the model's own maximum found by a bounded scalar search over the opening
    best = minimize_scalar(lambda y: -float(FRANCIS.solve(head, FRANCIS_SPEED, y, rho=RHO,
                                                          g=G).efficiency),
                           bounds=(0.2, 1.0), method="bounded", options={"xatol": 1e-6})
    top = FRANCIS.solve(head, FRANCIS_SPEED, best.x, rho=RHO, g=G)
    # efficiency is flat at its peak: the 2 %-of-P_max load grid costs little efficiency
    # (measured 3e-5 to 6e-5, the chart's interpolation) and places the power within one
    # grid step (measured up to half a step, 1 % of P_max)
    assert bep.efficiency == pytest.approx(float(top.efficiency), abs=1e-4)
    assert abs(bep.power - float(top.shaft_power)) <= (DEFAULT_LOADS[1] - DEFAULT_LOADS[0]) * p_max
    # common practice: large Francis units peak at about 0.93-0.95 (design_coefficients)
    assert 0.92 < bep.efficiency < 0.96


def test_bep_outside_the_chart_is_refused(francis_chart: HillChart) -> None:
    with pytest.raises(ValueError, match="outside the hill chart"):
        francis_chart.best_efficiency_point(650.0)


def test_pelton_bep_is_at_full_load(pelton_chart: HillChart) -> None:
    # With a fixed head and speed the Pelton model's work per kg is fixed and its
    # mechanical losses are constant, so efficiency rises with flow: the BEP is the last
    # load of the chart.
    bep = pelton_chart.best_efficiency_point(500.0)
    p_max = float(_max_power_at(pelton_chart, np.array([500.0]))[0])
    assert bep.power == pytest.approx(p_max, rel=1e-12)
    assert bep.opening == pytest.approx(1.0, abs=1e-9)


# ---------------------------------------------------------------- storage round trip

@pytest.mark.parametrize("which", ["francis", "pelton"])
def test_dict_and_json_round_trip_gives_identical_evaluations(which: str) -> None:
    if which == "francis":
        # loads from 1 %: below the power of the smallest opening, so the table has NaN cells
        chart = build_hill_chart(FRANCIS, heads=HEADS, speed=FRANCIS_SPEED,
                                 loads=np.linspace(0.01, 1.0, 100), rho=RHO, g=G)
    else:
        chart = build_hill_chart(PELTON, heads=HEADS, speed=PELTON_SPEED, modes=MODES,
                                 loads=np.linspace(0.001, 1.0, 100), rho=RHO, g=G)
    assert np.isnan(chart.eta_by_power).any()
    text = json.dumps(chart.to_dict(), allow_nan=False)  # NaN stored as null, valid JSON
    for again in (HillChart.from_dict(chart.to_dict()), HillChart.from_dict(json.loads(text))):
        for name in ("heads", "loads", "max_power", "max_flow", "eta_by_power", "eta_by_flow",
                     "opening_by_power", "flow_by_power", "mode_by_power"):
            np.testing.assert_array_equal(getattr(again, name), getattr(chart, name))
        assert (again.speed, again.rho, again.g) == (chart.speed, chart.rho, chart.g)
        assert again.meta == chart.meta
        rng = np.random.default_rng(SEED)
        head = rng.uniform(390.0, 610.0, 20000)
        power = rng.uniform(-0.05, 1.05, head.size) * _max_power_at(chart, head)
        flow = rng.uniform(-0.05, 1.05, head.size) * chart.max_flow[10]
        for method in ("efficiency_at_power", "opening_at_power", "flow_at_power",
                       "mode_at_power"):
            np.testing.assert_array_equal(getattr(again, method)(power, head),
                                          getattr(chart, method)(power, head))
        np.testing.assert_array_equal(again.efficiency_at_flow(flow, head),
                                      chart.efficiency_at_flow(flow, head))
        assert again.best_efficiency_point(512.0) == chart.best_efficiency_point(512.0)


# ---------------------------------------------------------------- affinity (unit quantities)

def test_affinity_at_equal_unit_speed() -> None:
    # IEC 60193 unit quantities (from memory): n11 = n D / sqrt(H), P11 = P / (D^2 H^1.5).
    # At a FIXED speed no head change keeps n11, so eta(P, H) = eta(P (H2/H)^1.5, H2) is
    # not a property of a fixed-speed chart (shown at the end). What similarity does say:
    # a chart at speed n sqrt(s) over heads s H is the chart at n over H with P scaled by
    # s^1.5 and Q by s^0.5, at equal efficiency, for a model whose losses all scale with
    # the velocities squared (hydraulic), with rho omega^3 R^5 (disc friction) or with the
    # flow (leakage). The bearing loss k omega^2 does not, so it is set to zero.
    model = FrancisModel(FRANCIS_GEOMETRY, dict(FRANCIS_COEFFS, bearing=0.0))
    s = 1.44  # 750 rpm -> 900 rpm, 400..600 m -> 576..864 m
    base = build_hill_chart(model, heads=HEADS, speed=FRANCIS_SPEED, rho=RHO, g=G)
    scaled = build_hill_chart(model, heads=s * HEADS, speed=FRANCIS_SPEED * math.sqrt(s),
                              rho=RHO, g=G)
    rng = np.random.default_rng(SEED)
    head = rng.uniform(400.0, 600.0, 5000)
    power = rng.uniform(0.1, 0.98, head.size) * _max_power_at(base, head)
    flow = rng.uniform(0.1, 0.98, head.size) * np.interp(head, base.heads, base.max_flow)
    np.testing.assert_allclose(scaled.max_power, base.max_power * s**1.5, rtol=1e-9)
    np.testing.assert_allclose(scaled.max_flow, base.max_flow * s**0.5, rtol=1e-9)
    eta = base.efficiency_at_power(power, head)
    assert np.isfinite(eta).all()
    np.testing.assert_allclose(scaled.efficiency_at_power(power * s**1.5, s * head), eta,
                               rtol=0, atol=1e-9)
    np.testing.assert_allclose(scaled.efficiency_at_flow(flow * s**0.5, s * head),
                               base.efficiency_at_flow(flow, head), rtol=0, atol=1e-9)
    np.testing.assert_allclose(scaled.opening_at_power(power * s**1.5, s * head),
                               base.opening_at_power(power, head), rtol=0, atol=1e-9)
    # the same check with the bearing loss back in fails by about the bearing loss's share
    # (0.15 % of the design power, scaled by 1 - 1/sqrt(s) -> about 2.5e-4 near the BEP)
    with_bearing = build_hill_chart(FRANCIS, heads=HEADS, speed=FRANCIS_SPEED, rho=RHO, g=G)
    with_bearing_scaled = build_hill_chart(FRANCIS, heads=s * HEADS,
                                           speed=FRANCIS_SPEED * math.sqrt(s), rho=RHO, g=G)
    gap = (with_bearing_scaled.efficiency_at_power(power * s**1.5, s * head)
           - with_bearing.efficiency_at_power(power, head))
    assert np.all(gap > 0) and np.max(gap) > 2e-4
    # and at a fixed speed the naive head shift is not an identity (n11 changes)
    other = rng.uniform(400.0, 600.0, head.size)
    shifted = base.efficiency_at_power(power * (other / head) ** 1.5, other)
    assert np.nanmax(np.abs(shifted - eta)) > 1e-2
