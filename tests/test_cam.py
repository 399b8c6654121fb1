"""Kaplan cam check: recovery of the model optimum, zero gain when tuned, refusals."""

from __future__ import annotations

import math

import numpy as np
import pytest

from analytics.cam import CELL_COLUMNS, cam_check
from analytics.runners.kaplan import DEMO_SPEED, demo_model

MODEL = demo_model()
CAM_OPENINGS = np.linspace(0.3, 0.9, 7)
CAM_HEADS = np.linspace(14.0, 22.0, 5)
OPENING_BANDS = [0.4, 0.5, 0.6, 0.7, 0.8]
HEAD_BANDS = [16.0, 18.0, 20.0]
WINDOW = 600.0  # [s] steady-window length of the synthetic data
SWEEP = math.radians(3.0)  # blade sweep either side of the cam, as in an index test


def _windows(installed, n: int = 1200, noise: float = 0.0, seed: int = 1):
    """Steady windows from the model: opening and head uniform over the bands, blade angle
    swept uniformly within +-3 deg of the installed cam, efficiency and energy from the
    model (plus Gaussian noise of ``noise`` on the efficiency)."""
    rng = np.random.default_rng(seed)
    y = rng.uniform(OPENING_BANDS[0], OPENING_BANDS[-1], n)
    h = rng.uniform(HEAD_BANDS[0], HEAD_BANDS[-1], n)
    phi = installed(y, h) + rng.uniform(-SWEEP, SWEEP, n)
    sol = MODEL.solve(h, DEMO_SPEED, y, blade_angle=phi)
    assert sol.converged.all()
    eta = sol.efficiency + rng.normal(0.0, noise, n)
    return y, h, phi, eta, sol.shaft_power * WINDOW


def _truth(cells, installed):
    """Model optimum and exact gain of moving from the installed angle to it, per cell."""
    y, h = cells["opening_centre"].to_numpy(), cells["head_centre"].to_numpy()
    best = MODEL.optimal_blade_angle(h, DEMO_SPEED, y)
    at_best = MODEL.solve(h, DEMO_SPEED, y, blade_angle=best).efficiency
    at_cam = MODEL.solve(h, DEMO_SPEED, y, blade_angle=installed(y, h)).efficiency
    return best, at_best - at_cam


@pytest.fixture(scope="module")
def mistuned():
    return MODEL.with_optimal_cam(CAM_OPENINGS, CAM_HEADS, DEMO_SPEED,
                                  offset=math.radians(2.0)).geometry.cam_angle


@pytest.fixture(scope="module")
def tuned():
    return MODEL.with_optimal_cam(CAM_OPENINGS, CAM_HEADS, DEMO_SPEED).geometry.cam_angle


def test_recovers_the_optimum_under_a_mistuned_cam(mistuned) -> None:
    y, h, phi, eta, energy = _windows(mistuned)
    cells, totals = cam_check(y, h, phi, eta, energy, mistuned,
                              opening_bands=OPENING_BANDS, head_bands=HEAD_BANDS)
    assert list(cells.columns) == list(CELL_COLUMNS) and len(cells) == 8
    assert cells["accepted"].all() and (cells["reason"] == "").all()
    best, true_gain = _truth(cells, mistuned)
    # tolerance 0.3 deg (noise-free data): the quadratic vertex of an asymmetric off-cam
    # curve keeps a small bias, 0.1-0.2 deg here against the 2 deg mistuning
    error = np.degrees(cells["best_blade_angle"].to_numpy() - best)
    assert np.all(np.abs(error) < 0.3)
    change = np.degrees(cells["angle_change"].to_numpy())
    assert np.all((change < -1.6) & (change > -2.4))  # the cam should close by ~2 deg
    gain = cells["efficiency_gain"].to_numpy()
    assert np.all(gain > 0)
    # the fitted gain within 20 % of the model's exact gain (0.5-1.1 points here)
    np.testing.assert_allclose(gain, true_gain, rtol=0.2)
    # energy a re-tuned cam would add: cell energy * gain / efficiency at the installed angle
    expected = cells["energy"] * cells["efficiency_gain"] / cells["efficiency_installed"]
    np.testing.assert_allclose(cells["energy_gain"], expected, rtol=1e-12)
    assert totals["energy_gain"] == pytest.approx(cells["energy_gain"].sum(), rel=1e-12)
    assert totals["energy"] == pytest.approx(energy.sum(), rel=1e-12)
    assert totals["windows_used"] == 1200 and totals["windows_outside"] == 0
    assert 0 < totals["relative_gain"] < 0.02


def test_recovers_the_optimum_with_index_test_noise(mistuned) -> None:
    # 0.2 % noise on each window's efficiency (index-test repeatability: common practice);
    # tolerance 0.75 deg, about two standard errors of the vertex with ~150 windows a cell
    y, h, phi, eta, energy = _windows(mistuned, noise=0.002, seed=5)
    cells, _ = cam_check(y, h, phi, eta, energy, mistuned,
                         opening_bands=OPENING_BANDS, head_bands=HEAD_BANDS)
    assert cells["accepted"].all()
    best, _ = _truth(cells, mistuned)
    error = np.degrees(cells["best_blade_angle"].to_numpy() - best)
    assert np.all(np.abs(error) < 0.75)
    assert np.all(cells["efficiency_gain"] > 0) and np.all(cells["angle_change"] < 0)
    assert np.all(cells["rmse"] > 0.0015) and np.all(cells["rmse"] < 0.006)


def test_no_gain_when_the_cam_is_the_optimum(tuned) -> None:
    y, h, phi, eta, energy = _windows(tuned, seed=2)
    cells, totals = cam_check(y, h, phi, eta, energy, tuned,
                              opening_bands=OPENING_BANDS, head_bands=HEAD_BANDS)
    assert cells["accepted"].all()
    # tolerance: gain below 0.05 points (a quarter of the 0.2 % index-test repeatability,
    # common practice) and angle change below 0.3 deg
    assert np.all(cells["efficiency_gain"].between(0.0, 5e-4))
    assert np.all(np.abs(np.degrees(cells["angle_change"])) < 0.3)
    assert totals["relative_gain"] < 5e-4


def test_exact_quadratic_is_recovered_exactly() -> None:
    # least squares reproduces data that lie in its own model space (a mathematical
    # identity): optimum 0.05 rad at the cell centre, drifting with opening (the x u term)
    rng = np.random.default_rng(3)
    n = 400
    y, h = rng.uniform(0.4, 0.6, n), rng.uniform(10.0, 14.0, n)
    phi = rng.uniform(-0.02, 0.12, n)
    eta = (0.9 - 40.0 * (phi - 0.05) ** 2 + 8.0 * (phi - 0.05) * (y - 0.5)
           + 0.02 * (y - 0.5) - 0.01 * (h - 12.0))
    cam = lambda o, hh: np.full(np.shape(o), 0.07)  # noqa: E731
    cells, _ = cam_check(y, h, phi, eta, np.full(n, 1e9), cam,
                         opening_bands=[0.4, 0.6], head_bands=[10.0, 14.0])
    row = cells.iloc[0]
    assert row["accepted"] and not row["best_at_edge"]
    assert row["best_blade_angle"] == pytest.approx(0.05, abs=1e-9)
    assert row["curvature"] == pytest.approx(-40.0, rel=1e-9)
    assert row["efficiency_gain"] == pytest.approx(40.0 * 0.02 ** 2, rel=1e-7)
    assert row["rmse"] < 1e-10


def test_relative_efficiency_scale_does_not_change_the_advice(mistuned) -> None:
    # an index efficiency is known only to a constant factor: angle and energy stay put
    y, h, phi, eta, energy = _windows(mistuned, n=600, seed=4)
    a, _ = cam_check(y, h, phi, eta, energy, mistuned, opening_bands=OPENING_BANDS,
                     head_bands=HEAD_BANDS)
    b, _ = cam_check(y, h, phi, 0.83 * eta, energy, mistuned, opening_bands=OPENING_BANDS,
                     head_bands=HEAD_BANDS)
    np.testing.assert_allclose(b["best_blade_angle"], a["best_blade_angle"], atol=1e-10)
    np.testing.assert_allclose(b["energy_gain"], a["energy_gain"], rtol=1e-8)
    np.testing.assert_allclose(b["efficiency_gain"], 0.83 * a["efficiency_gain"], rtol=1e-8)


def test_cells_without_enough_data_are_refused_with_a_reason(mistuned, tuned) -> None:
    rng = np.random.default_rng(6)
    y, h, phi, eta, energy = _windows(mistuned, n=900, seed=6)
    # empty the (0.7-0.8, 18-20) cell and leave 8 windows in (0.4-0.5, 16-18)
    empty = (y >= 0.7) & (h >= 18.0)
    sparse = np.flatnonzero((y < 0.5) & (h < 18.0))[8:]
    keep = ~empty
    keep[sparse] = False
    # (0.5-0.6, 16-18): blade angle swept by only +-0.3 deg
    narrow = (y >= 0.5) & (y < 0.6) & (h < 18.0)
    phi = np.where(narrow, mistuned(y, h) + rng.uniform(-0.005, 0.005, y.size), phi)
    # (0.6-0.7, 16-18): a blade angle that only follows opening and head (a steep cam,
    # spread over 7 deg, but no independent variation)
    on_cam = (y >= 0.6) & (y < 0.7) & (h < 18.0)
    phi = np.where(on_cam, tuned(y, h) + 0.3 * (y - 0.65) + 0.05 * (h - 17.0), phi)
    eta = MODEL.solve(h, DEMO_SPEED, y, blade_angle=phi).efficiency
    # (0.4-0.5, 18-20): an efficiency that rises away from the middle (not concave)
    convex = (y < 0.5) & (h >= 18.0)
    eta = np.where(convex, 0.9 + 20.0 * (phi - mistuned(y, h)) ** 2, eta)
    y, h, phi, eta, energy = y[keep], h[keep], phi[keep], eta[keep], energy[keep]
    cells, totals = cam_check(np.append(y, [0.95, np.nan]), np.append(h, [17.0, 17.0]),
                              np.append(phi, [0.0, 0.0]), np.append(eta, [0.9, 0.9]),
                              np.append(energy, [1.0, 1.0]), mistuned,
                              opening_bands=OPENING_BANDS, head_bands=HEAD_BANDS)
    keys = zip(cells["opening_low"], cells["head_low"], strict=True)
    reason = dict(zip(keys, cells["reason"], strict=True))
    assert reason[(0.7, 18.0)] == "no windows"
    assert reason[(0.4, 16.0)] == "too few windows (8 < 20)"
    assert reason[(0.5, 16.0)].startswith("blade-angle spread")
    assert reason[(0.6, 16.0)].startswith("blade angle follows opening and head")
    assert reason[(0.4, 18.0)].startswith("fit not concave")
    refused = cells[~cells["accepted"]]
    assert len(refused) == 5 and refused["best_blade_angle"].isna().all()
    assert refused["energy_gain"].isna().all()
    accepted = cells[cells["accepted"]]
    assert len(accepted) == 3 and (accepted["reason"] == "").all()
    assert totals["cells_accepted"] == 3 and totals["windows_outside"] == 2
    assert totals["energy_gain"] == pytest.approx(accepted["energy_gain"].sum())


def test_input_checks() -> None:
    cam = lambda o, hh: np.zeros(np.shape(o))  # noqa: E731
    with pytest.raises(ValueError, match="one length"):
        cam_check([0.5], [10.0, 11.0], [0.0], [0.9], [1.0], cam, opening_bands=[0, 1],
                  head_bands=[0, 20])
    with pytest.raises(ValueError, match="ascending"):
        cam_check([0.5], [10.0], [0.0], [0.9], [1.0], cam, opening_bands=[1, 0],
                  head_bands=[0, 20])
