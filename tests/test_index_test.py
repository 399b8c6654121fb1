"""Index-test efficiency: worked examples step by step, Winter-Kennedy law, index constant."""

from __future__ import annotations

import inspect
import math

import numpy as np
import pandas as pd
import pytest

from analytics.index_test import (
    INDEX_CONSTANT_MIN_POINTS,
    IndexConstant,
    deviation,
    generator_efficiency,
    hydraulic_power,
    index_constant,
    index_efficiency,
    net_head,
    net_head_from_pressure,
    relative_energy_loss,
    turbine_power,
    velocity_head,
    winter_kennedy_flow,
)

# --- worked examples ---------------------------------------------------------------------


def test_textbook_turbine_generator_example_step_by_step() -> None:
    # Cengel & Boles, Thermodynamics: An Engineering Approach, chapter 2 problem (book and
    # chapter from memory; statement and answers as reproduced at
    # http://www.freekent.com/the-water-in-a-large-lake-is-to-be-used-to/): water from a lake
    # 50 m deep at 5000 kg/s, 1862 kW of electric power, generator efficiency 95 %;
    # answers (a) overall efficiency 0.760, (b) turbine efficiency 0.8, (c) shaft power
    # about 1960 kW. rho Q = 5000 kg/s, taken as rho = 1000 kg/m3 and Q = 5 m3/s; g = 9.81.
    p_gen, eta_gen, rho, q, h, g = 1862e3, 0.95, 1000.0, 5.0, 50.0, 9.81
    # step 1, shaft power P_gen / eta_gen: 1960 kW (answer (c), printed to 3 figures)
    p_turbine = turbine_power(p_gen, eta_gen)
    assert p_turbine == pytest.approx(1960e3, rel=1e-12)  # 1862/0.95 = 1960 exactly
    # step 2, mechanical energy of the water rho g Q H = 5000 * 9.81 * 50 = 2452.5 kW
    p_h = hydraulic_power(q, h, rho, g)
    assert p_h == pytest.approx(2452.5e3, rel=1e-12)
    # step 3, turbine efficiency 1960/2452.5 = 0.7992; answer (b) 0.8 is rounded to one
    # figure, hence the 0.001 tolerance
    eta = index_efficiency(p_gen, eta_gen, q, h, rho, g)
    assert eta == pytest.approx(p_turbine / p_h, rel=1e-12)
    assert eta == pytest.approx(0.8, abs=1e-3)
    # step 4, overall efficiency eta_turbine * eta_gen = 1862/2452.5 = 0.7592; answer (a)
    # 0.760 (the book rounds its intermediate 2453 kW), tolerance 0.001
    assert eta * eta_gen == pytest.approx(0.760, abs=1e-3)


def test_hydraulic_power_engineering_toolbox_example() -> None:
    # Engineering ToolBox, "Hydropower" (https://www.engineeringtoolbox.com/hydropower-d_1359.html):
    # 1 m3/s falling 100 m, rho 1000 kg/m3, g 9.81 m/s2 -> 981 000 W
    assert hydraulic_power(1.0, 100.0, 1000.0, 9.81) == pytest.approx(981_000.0, rel=1e-12)


def test_net_head_with_head_loss_worked_example() -> None:
    # Worked answer at https://qammunity.org/9038247: gross head 41 m, head loss 2 m,
    # 1 m3/s, turbine efficiency 0.77, gamma = 9810 N/m3 -> net head 39 m, P = 294594.3 W.
    # The 2 m loss at 1 m3/s is k_p = 2 m/(m3/s)^2.
    head = net_head(41.0, 0.0, flow=1.0, penstock_loss_coefficient=2.0)
    assert head == pytest.approx(39.0, abs=1e-12)
    assert 0.77 * hydraulic_power(1.0, head, 1000.0, 9.81) == pytest.approx(294_594.3, abs=0.05)
    # and back: that power, with an ideal generator, gives 0.77
    assert index_efficiency(294_594.3, 1.0, 1.0, head, 1000.0, 9.81) == pytest.approx(
        0.77, abs=1e-7)


# --- net head ------------------------------------------------------------------------------


def test_net_head_velocity_terms_hand_arithmetic() -> None:
    # Hand arithmetic of the IEC 60041 net-head definition (definition from memory):
    # z1 250 m piezometric at the high-pressure section, z2 150 m, Q 100 m3/s,
    # k_p 1e-4 -> loss 1 m; A1 10 m2 -> v1 10 m/s -> 100/19.62 = 5.09684 m;
    # A2 50 m2 -> v2 2 m/s -> 4/19.62 = 0.20387 m.
    assert velocity_head(100.0, 10.0) == pytest.approx(100.0 / 19.62, rel=1e-12)
    assert velocity_head(100.0, 50.0) == pytest.approx(4.0 / 19.62, rel=1e-12)
    h = net_head(250.0, 150.0, flow=100.0, penstock_loss_coefficient=1e-4,
                 inlet_area=10.0, outlet_area=50.0)
    assert h == pytest.approx(100.0 - 1.0 + 100.0 / 19.62 - 4.0 / 19.62, rel=1e-12)
    # only the outlet term (headwater given as reservoir level): 100 - 1 - 0.20387
    h_res = net_head(250.0, 150.0, flow=100.0, penstock_loss_coefficient=1e-4, outlet_area=50.0)
    assert h_res == pytest.approx(98.0 + 1.0 - 4.0 / 19.62, rel=1e-12)
    # no flow given, no flow terms: the gross head
    assert net_head(250.0, 150.0) == 100.0


def test_net_head_pelton_low_reference_is_jet_circle() -> None:
    # Pelton: the low reference is the jet-circle elevation (IEC 60041, from memory), no
    # outlet velocity term. 812 m headwater, jet plane 310 m, Q 4 m3/s, k_p 0.5 -> 8 m loss.
    assert net_head(812.0, 310.0, flow=4.0, penstock_loss_coefficient=0.5) == pytest.approx(494.0)


def test_net_head_needs_flow_for_flow_terms() -> None:
    with pytest.raises(ValueError, match="flow is required"):
        net_head(250.0, 150.0, penstock_loss_coefficient=1e-4)
    with pytest.raises(ValueError, match="flow is required"):
        net_head(250.0, 150.0, outlet_area=50.0)
    with pytest.raises(ValueError, match="flow is required"):
        net_head_from_pressure(1e5, 0.0, 0.0, rho=1000.0, inlet_area=10.0)


def test_net_head_from_pressure_hand_arithmetic() -> None:
    # p1/(rho g) = 95 m with rho 1000, g 9.81; gauge at 152 m, tailwater 150 m -> 97 m;
    # v1 (10 m2, 100 m3/s) 5.09684 m; v2 (50 m2) 0.20387 m.
    p = 95.0 * 1000.0 * 9.81
    h = net_head_from_pressure(p, 152.0, 150.0, rho=1000.0, flow=100.0, inlet_area=10.0,
                               outlet_area=50.0)
    assert h == pytest.approx(97.0 + 100.0 / 19.62 - 4.0 / 19.62, rel=1e-12)
    # same as net_head on the piezometric level at the high-pressure section
    assert h == pytest.approx(net_head(247.0, 150.0, flow=100.0, inlet_area=10.0,
                                       outlet_area=50.0), rel=1e-12)
    # air column: gauge 2 m above the tailwater, rho_air 1.2 -> -(1.2/1000)*2 = -0.0024 m
    h_air = net_head_from_pressure(p, 152.0, 150.0, rho=1000.0, air_density=1.2)
    assert h_air - 97.0 == pytest.approx(-0.0024, rel=1e-9)


def test_net_head_nan_and_series() -> None:
    levels = pd.Series([250.0, np.nan, 251.0], index=pd.date_range("2024-01-01", periods=3))
    out = net_head(levels, 150.0, flow=np.array([100.0, 100.0, np.nan]),
                   penstock_loss_coefficient=1e-4)
    assert isinstance(out, pd.Series) and out.index.equals(levels.index)
    assert out.iloc[0] == pytest.approx(99.0) and out.iloc[1:].isna().all()
    assert math.isnan(velocity_head(10.0, 0.0))  # no area, no velocity


# --- Winter-Kennedy ------------------------------------------------------------------------


def test_winter_kennedy_square_root_law() -> None:
    # Winter & Kennedy (1933) / ASME PTC 18 index method: Q = k dp^0.5, so quadrupling
    # dp doubles Q and nine times dp triples it.
    dp = np.array([1.0e4, 4.0e4, 9.0e4])
    q = winter_kennedy_flow(dp, coefficient=0.25)
    assert q[1] / q[0] == pytest.approx(2.0, rel=1e-12)
    assert q[2] / q[0] == pytest.approx(3.0, rel=1e-12)
    assert q[0] == pytest.approx(0.25 * 100.0, rel=1e-12)  # sqrt(1e4) = 100
    # another exponent: Q = k dp^n exactly
    assert winter_kennedy_flow(5.0e4, 0.1, 0.52) == pytest.approx(0.1 * 5.0e4 ** 0.52, rel=1e-12)


def test_winter_kennedy_invalid_dp_is_nan() -> None:
    q = winter_kennedy_flow(np.array([-1.0, np.nan, 0.0, 100.0]))
    assert math.isnan(q[0]) and math.isnan(q[1])
    assert q[2] == 0.0 and q[3] == pytest.approx(10.0)
    assert math.isnan(winter_kennedy_flow(-5.0))
    series = pd.Series([4.0, -4.0], index=["a", "b"])
    out = winter_kennedy_flow(series)
    assert isinstance(out, pd.Series) and out["a"] == pytest.approx(2.0) and math.isnan(out["b"])


# --- generator efficiency ------------------------------------------------------------------


def test_generator_efficiency_piecewise_linear_held_at_ends() -> None:
    curve_p = np.array([20e6, 50e6, 100e6])
    curve_e = np.array([0.960, 0.980, 0.985])
    out = generator_efficiency(np.array([0.0, 20e6, 35e6, 75e6, 100e6, 150e6, np.nan]),
                               curve_p, curve_e)
    # midpoints by hand: (0.960+0.980)/2 = 0.970; (0.980+0.985)/2 = 0.9825
    np.testing.assert_allclose(out[:6], [0.960, 0.960, 0.970, 0.9825, 0.985, 0.985],
                               rtol=1e-12)
    assert math.isnan(out[6])


def test_generator_efficiency_constant_and_invalid_curves() -> None:
    out = generator_efficiency(np.array([1e6, np.nan]), None, 0.975)
    assert out[0] == 0.975 and math.isnan(out[1])
    assert generator_efficiency(5e6, None, 0.975) == 0.975
    with pytest.raises(ValueError, match="fractions"):
        generator_efficiency(1e6, None, 97.5)  # a percentage, not a fraction
    with pytest.raises(ValueError, match="strictly increasing"):
        generator_efficiency(1e6, [50e6, 20e6], [0.98, 0.96])
    with pytest.raises(ValueError, match="same length"):
        generator_efficiency(1e6, [20e6, 50e6], [0.96, 0.97, 0.98])


# --- index efficiency ----------------------------------------------------------------------


def test_index_efficiency_nan_where_no_flow_or_head() -> None:
    eta = index_efficiency(np.full(5, 1e6), 0.98, np.array([1.0, 0.0, -1.0, 1.0, np.nan]),
                           np.array([100.0, 100.0, 100.0, 0.0, 100.0]), 1000.0, 9.81)
    assert eta[0] == pytest.approx(1e6 / 0.98 / 981_000.0)
    assert np.isnan(eta[1:]).all()
    assert math.isnan(index_efficiency(1e6, 0.0, 1.0, 100.0, 1000.0, 9.81))


def _baseline(rng: np.random.Generator, n: int, k_true: float, drift: float = 0.0):
    """Synthetic unit: a reference curve (invented inputs, not reference values) and plant data."""
    rho, g, eta_gen = 999.7, 9.81, 0.98
    dp = rng.uniform(2e4, 8e4, n)  # [Pa]
    head = rng.uniform(95.0, 105.0, n)
    q = k_true * np.sqrt(dp)
    eta_ref = 0.93 - 0.4 * (dp / 5e4 - 1.0) ** 2  # a peaked curve over the dp range
    eta_true = eta_ref * (1.0 + rng.normal(0.0, 0.004, n)) + drift
    p_gen = eta_true * rho * g * q * head * eta_gen
    return dict(dp=dp, head=head, eta_ref=eta_ref, p_gen=p_gen, rho=rho, g=g, eta_gen=eta_gen)


def _raw(data: dict, k: float) -> np.ndarray:
    q_index = winter_kennedy_flow(data["dp"], coefficient=k)
    return index_efficiency(data["p_gen"], data["eta_gen"], q_index, data["head"], data["rho"],
                            data["g"])


def test_index_constant_invariant_to_a_wrong_k() -> None:
    # Synthetic: the index method's premise (IEC 60041 clause 15, from memory) is that the
    # unknown k is a pure scale. A k off by 37 % changes every raw efficiency by 1/1.37 but,
    # after the constant, neither the index efficiency nor the deviation.
    rng = np.random.default_rng(60041)
    base = _baseline(rng, 400, k_true=1.7)
    later = _baseline(rng, 400, k_true=1.7, drift=-0.01)  # one point lost after the baseline
    raw_1, raw_2 = _raw(base, 1.0), _raw(base, 1.37)
    np.testing.assert_allclose(raw_1 / raw_2, 1.37, rtol=1e-12)
    c1 = index_constant(raw_1, base["eta_ref"])
    c2 = index_constant(raw_2, base["eta_ref"])
    assert c1.value / c2.value == pytest.approx(1.37, rel=1e-12)
    assert c1.n_used == c2.n_used == 400
    # with k = 1 the flow index is Q_true/k_true, so eta_raw = k_true eta and K = k_true
    # (to the noise of the baseline's median; 5 standard errors)
    assert c1.value == pytest.approx(1.7, rel=5 * c1.relative_standard_error)
    dev_1 = deviation(c1.apply(_raw(later, 1.0)), later["eta_ref"])
    dev_2 = deviation(c2.apply(_raw(later, 1.37)), later["eta_ref"])
    np.testing.assert_allclose(dev_1, dev_2, rtol=0, atol=1e-12)
    # the drift survives the constant: median deviation about -0.01 (noise sd about 0.0037
    # per point, 400 points: standard error of the median about 0.0002; 0.001 allows 5x)
    assert np.median(dev_1) == pytest.approx(-0.01, abs=1e-3)


def test_index_constant_estimator_spread_and_outliers() -> None:
    rng = np.random.default_rng(18)
    ratio_true, sigma = 0.62, 0.005
    eta_ref = rng.uniform(0.85, 0.94, 2000)
    eta_raw = ratio_true * eta_ref * (1.0 + rng.normal(0.0, sigma, 2000))
    clean = index_constant(eta_raw, eta_ref)
    # the robust spread estimates the ratio's sd, 0.62*0.005 = 0.0031; the MAD's own relative
    # error at n = 2000 is about 2.6 % (asymptotic 1.17/sqrt(n), from memory); 10 % allows ~4x
    assert clean.spread == pytest.approx(ratio_true * sigma, rel=0.10)
    assert clean.standard_error == pytest.approx(
        math.sqrt(math.pi / 2) * clean.spread / math.sqrt(2000), rel=1e-12)
    assert clean.value == pytest.approx(ratio_true, abs=4 * clean.standard_error)
    # 5 % gross outliers (a sensor spike halves the raw efficiency) move the median by
    # about 0.063 sd (quantile shift of 0.05/2 of a normal), far less than the mean
    spoiled = eta_raw.copy()
    spoiled[:100] *= 0.5
    robust = index_constant(spoiled, eta_ref)
    assert abs(robust.value - clean.value) < 0.15 * clean.spread
    mean_shift = abs(np.mean(spoiled / eta_ref) - np.mean(eta_raw / eta_ref))
    assert mean_shift > 10 * abs(robust.value - clean.value)


def test_index_constant_thin_baseline_raises_with_reason() -> None:
    eta_ref = np.full(40, 0.9)
    eta_raw = np.full(40, 0.5)
    eta_raw[:15] = np.nan  # 25 usable of 40
    with pytest.raises(ValueError, match=r"too thin: 25 usable points .* of 40, at least 30"):
        index_constant(eta_raw, eta_ref)
    c = index_constant(eta_raw, eta_ref, min_points=25)
    assert isinstance(c, IndexConstant)
    assert (c.value, c.n_used, c.n_excluded, c.spread) == (pytest.approx(0.5 / 0.9), 25, 15, 0.0)
    with pytest.raises(ValueError, match="pairs"):
        index_constant(np.ones(40), np.ones(39))


# --- deviation and lost energy -------------------------------------------------------------


def test_deviation_and_relative_energy_loss() -> None:
    # domain primer section 4: the same water at the reference efficiency would have given
    # P (eta_ref/eta_i - 1) more. 0.90 against 0.92: -0.02 (two points) and 0.02222...
    assert deviation(0.90, 0.92) == pytest.approx(-0.02, abs=1e-15)
    loss = relative_energy_loss(0.90, 0.92)
    assert loss == pytest.approx(0.92 / 0.90 - 1.0, rel=1e-12)
    # identity from eta = P/(rho g Q H): P * loss = rho g Q H eta_ref - P
    rho, g, q, h = 999.7, 9.81, 120.0, 90.0
    p = 0.90 * hydraulic_power(q, h, rho, g)
    assert p * loss == pytest.approx(hydraulic_power(q, h, rho, g) * 0.92 - p, rel=1e-10)
    out = relative_energy_loss(np.array([0.0, -0.1, np.nan, 0.95]), 0.92)
    assert np.isnan(out[:3]).all() and out[3] < 0.0  # better than reference: negative loss


# --- public API lock -----------------------------------------------------------------------


def test_public_defaults_are_locked() -> None:
    wk = inspect.signature(winter_kennedy_flow).parameters
    assert (wk["coefficient"].default, wk["exponent"].default) == (1.0, 0.5)
    assert inspect.signature(index_constant).parameters["min_points"].default == 30
    assert INDEX_CONSTANT_MIN_POINTS == 30
    nh = inspect.signature(net_head).parameters
    assert nh["penstock_loss_coefficient"].default == 0.0 and nh["g"].default == 9.81
    assert list(inspect.signature(index_efficiency).parameters) == [
        "generator_power", "generator_eff", "flow", "head", "rho", "g"]
