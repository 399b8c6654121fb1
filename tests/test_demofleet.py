"""The demo fleet generator: determinism, valid plant files, DST, physics, ground truth.

The fleet is fictional; these tests check that its files say what truth.json says, and
that its physics holds together: the plant data come from each unit's "as built" runner
model (hydrodrift.demofleet.physics), water density from IAPWS-IF97 and gravity from the
IEC 60041 formula. Tolerances are explained beside each check.
"""

from __future__ import annotations

import csv
import json
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from iapws import IAPWS97
from scipy.optimize import brentq

from analytics.site import atmospheric_pressure, local_gravity
from analytics.water import density
from hydrodrift.demofleet import generate_demo, simulate_fleet
from hydrodrift.demofleet.dispatch import (
    HF_VIBRATION_STOPPED_M_S2,
    SAMPLES_PER_HOUR,
    signature_state,
    simulate_plant,
)
from hydrodrift.demofleet.hydraulics import generator_efficiency
from hydrodrift.demofleet.physics import (
    AS_BUILT_FACTORS,
    CAM_FOLLOWING,
    CAM_MISTUNE_DEG,
    REFERENCE_G,
    unit_physics,
)
from hydrodrift.demofleet.scenario import (
    CONDITIONS,
    DEFAULT_START,
    FAULTS,
    GLIMMERFELS,
    LANTERN_BEND,
    SIGNATURES,
    plant_design,
)
from ingest.plant_file import PeltonGeometry, load_plant_file
from ingest.readers import iter_canonical_chunks
from ingest.report import FileReport
from jobs.reference import REFERENCE_WATER_TEMPERATURE, runner_model

DAYS = 14
SEED = 20261201  # generate_demo's default seed
YEAR_S = 365.25 * 86400  # Julian year, the scenario's rate unit
FOOT = 0.3048  # [m], international foot (definition)
CFS = FOOT**3  # [m3/s], cubic foot per second (definition)
MPA = 1e6


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory):
    return generate_demo(tmp_path_factory.mktemp("demo"), days=DAYS)


@pytest.fixture(scope="module")
def truth(demo) -> dict:
    return json.loads(demo.truth_file.read_text())


@pytest.fixture(scope="module")
def plants(demo) -> dict:
    return {p.plant.code: p for p in map(load_plant_file, demo.plant_files)}


@pytest.fixture(scope="module")
def sims(plants) -> dict:
    """The noise-free truth of the demo's fortnight, by plant code."""
    return {s.design.code: s for s in simulate_fleet(list(plants.values()), days=DAYS)}


@pytest.fixture(scope="module")
def lbd_60(plants):
    """Lantern Bend over 60 days: long enough for a slope of 1.5 points per year."""
    return simulate_plant(LANTERN_BEND, plants["LBD"], start=DEFAULT_START, days=60, seed=SEED)


def _files(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes()
            for p in sorted(root.rglob("*")) if p.is_file()}


def _tags(sim) -> dict[tuple[str, str], str]:
    return {(m.unit, m.signal): t for t, m in sim.plant.tags.items()}


def _as_built_from_files(plant, unit, truth: dict):
    """The unit's runner model built the way the service builds it (plant-file geometry,
    installed cam), with truth.json's as-built coefficients, at the reference charts' rho, g.
    """
    physics = unit_physics(plant.plant.code, unit.code)
    entry = next(u for u in truth["units"]
                 if (u["plant"], u["unit"]) == (plant.plant.code, unit.code))
    model = runner_model(unit, rho=physics.rho, g=physics.g)
    return model.with_coefficients(entry["as_built_coefficients"]), physics


# --------------------------------------------------------------------------- determinism
def test_same_seed_gives_byte_identical_files(demo, tmp_path: Path) -> None:
    again = generate_demo(tmp_path / "again", days=DAYS)
    first, second = _files(demo.root), _files(again.root)
    assert first.keys() == second.keys()
    assert all(first[k] == second[k] for k in first)
    assert again.rows_written == demo.rows_written


def test_another_seed_gives_other_data(demo, tmp_path: Path) -> None:
    other = generate_demo(tmp_path / "other", days=DAYS, seed=7)
    a, b = _files(demo.root), _files(other.root)
    exports = [k for k in a if k.startswith("exports/")]
    assert exports and all(a[k] != b[k] for k in exports)
    # the plant files do not depend on the seed
    assert all(a[k] == b[k] for k in a if k.startswith("plants/"))


def test_manifest_counts_the_rows(demo) -> None:
    data_rows = 0
    for path in demo.export_files:
        skip = 2 if "glimmerfels" in path.name else 1  # preamble + header / header
        data_rows += len(path.read_text(encoding="utf-8").splitlines()) - skip
    assert data_rows == demo.rows_written
    # every 10-minute sample: 4 units' wide rows less the 30-row gap, 44 long tags per sample
    # (2 levels + 3 units x 14: 12 process tags, draft-tube pulsation and HF vibration)
    samples = DAYS * 24 * SAMPLES_PER_HOUR
    assert demo.rows_written == (samples - 30) + samples * 44


def test_short_spans_are_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="days must be at least"):
        generate_demo(tmp_path, days=2)
    with pytest.raises(ValueError, match="timezone-aware"):
        generate_demo(tmp_path, days=5, start=datetime(2026, 1, 1))


# --------------------------------------------------------------------------- plant files
def _rated_flow(unit) -> float:
    """Flow at rated turbine power and rated head, from the plant file's own points."""
    rated_turbine = unit.rated_power / float(generator_efficiency(unit, [unit.rated_power])[0])
    sweep = sorted((p.power, p.flow) for p in unit.reference_points
                   if abs(p.head - unit.rated_head) < 1e-3)
    return float(np.interp(rated_turbine, *zip(*sweep, strict=True)))


def test_plant_files_validate_and_are_plausible(plants) -> None:
    glf, lbd = plants["GLF"], plants["LBD"]
    assert [u.runner_type for u in glf.units] == ["francis", "francis", "pelton", "pelton"]
    assert [u.runner_type for u in lbd.units] == ["kaplan"] * 3
    assert glf.plant.timezone != lbd.plant.timezone
    assert glf.export.layout == "wide" and glf.export.decimal == ","
    assert lbd.export.layout == "long" and lbd.export.time_basis == "local"
    for plant, grid_hz in ((glf, 50.0), (lbd, 60.0)):
        for unit in plant.units:
            rpm = unit.rated_speed * 60 / (2 * np.pi)
            pole_pairs = 60 * grid_hz / rpm
            # synchronous speed: n = 60 f / p with a whole number of pole pairs (definition)
            assert pole_pairs == pytest.approx(round(pole_pairs), abs=1e-9)
            assert 8 <= len(unit.reference_points) <= 15
            # the plant file gives no rated flow: the reference model derives it
            assert unit.rated_flow is None
            q = _rated_flow(unit)
            if isinstance(unit.geometry, PeltonGeometry):
                q /= unit.geometry.jet_count
            n_q = rpm * q**0.5 / unit.rated_head**0.75
            # specific speed ranges per runner type (textbook ranges, from memory)
            low, high = {"pelton": (5, 25), "francis": (20, 120), "kaplan": (100, 300)}[
                unit.runner_type]
            assert low <= n_q <= high, (unit.code, n_q)
            # penstock loss a few % of the head at rated flow (common practice)
            loss = unit.penstock_loss_coefficient * _rated_flow(unit) ** 2 / unit.rated_head
            assert 0.01 <= loss <= 0.05, (unit.code, loss)
            eta_gen = generator_efficiency(unit, np.array([0.5, 1.0]) * unit.rated_power)
            # large generators: 96-98.5 % (textbook range, from memory)
            assert np.all((eta_gen >= 0.96) & (eta_gen <= 0.985))
            if unit.runner_type == "kaplan":
                cam = np.array(unit.geometry.cam)
                # a full grid of 9 openings x 5 heads (the cam check needs a table)
                assert cam.shape == (45, 3)
                assert np.unique(cam[:, 0]).size == 9 and np.unique(cam[:, 1]).size == 5
    # reaction runners below tailwater (cavitation), Pelton jets above it
    tail_glf = 1478.0
    assert all(u.runner_reference_elevation < tail_glf for u in glf.units
               if u.runner_type == "francis")
    assert all(u.runner_reference_elevation > tail_glf + 1 for u in glf.units
               if u.runner_type == "pelton")


def _half_units(plant_code: str) -> tuple[float, float]:
    """Half of the last printed digit of head [m] and flow [m3/s] in the plant file."""
    design = plant_design(plant_code)
    dh = 0.5e-3 * (FOOT if design.length_unit == "ft" else 1.0)  # 3 decimals, m or ft
    dq = 0.05 * CFS if design.flow_unit == "cfs" else 0.5e-3  # 1 decimal cfs, 3 of m3/s
    return dh, dq


def _spread(f, x: np.ndarray, step: float) -> np.ndarray:
    """How far ``f`` moves when ``x`` moves by +-``step`` (linearised rounding error)."""
    return np.abs(f(x + step) - f(x - step)) / 2.0


def test_reference_points_are_the_as_built_model(plants, truth) -> None:
    """Francis and Kaplan points: the as-built model solved at the printed opening (and, for a
    Kaplan, on the plant file's cam); both reproduce the printed numbers to their digits."""
    dy, d_eta, d_power, d_blade = 0.5e-4, 0.5e-4, 50.0, np.deg2rad(0.005)  # printed digits
    checked = 0
    for plant in plants.values():
        dh, dq = _half_units(plant.plant.code)
        for unit in plant.units:
            if unit.runner_type == "pelton":
                continue
            model, physics = _as_built_from_files(plant, unit, truth)
            pts = unit.reference_points
            h = np.array([p.head for p in pts])
            y = np.array([p.opening for p in pts])
            w, rho, g = physics.speed, physics.rho, physics.g

            def solve(hh, yy, model=model, w=w, rho=rho, g=g):
                return model.solve(hh, w, yy, rho=rho, g=g)

            sol = solve(h, y)
            # the plant-file build matches the generator's own model; the plant file's rated
            # head (59.055 ft = 17.999964 m vs 18 m) moves the Kaplan design geometry a little
            same = physics.model.solve(h, w, y, rho=rho, g=g)
            assert np.allclose(sol.efficiency, same.efficiency, rtol=0, atol=1e-6)
            for name, printed, half in (("shaft_power", [p.power for p in pts], d_power),
                                        ("flow", [p.flow for p in pts], dq),
                                        ("efficiency", [p.efficiency for p in pts], d_eta)):
                value = getattr(sol, name)
                # printed to its last digit from a point solved at the unrounded opening and
                # head: the rounding of those two moves the model's value by the spreads
                # (1e-6 relative more for the rated-head difference checked just above)
                tol = (half
                       + _spread(lambda v, h=h, n=name: getattr(solve(h, v), n), y, dy)
                       + _spread(lambda v, y=y, n=name: getattr(solve(v, y), n), h, dh))
                assert np.all(np.abs(value - printed) <= 1.05 * tol + 1e-6 * np.abs(value)), (
                    unit.code, name, value - printed, tol)
            if unit.runner_type == "kaplan":
                cam = model.geometry.cam_angle
                blade = np.array([p.blade_angle for p in pts])
                tol = (d_blade + _spread(lambda v, c=cam, h=h: c(v, h), y, dy)
                       + _spread(lambda v, c=cam, y=y: c(y, v), h, dh))
                assert np.all(np.abs(cam(y, h) - blade) <= 1.05 * tol), unit.code
            checked += len(pts)
    assert checked > 40


def _best_pelton(model, physics, power: float, head: float) -> float:
    """Best efficiency of the model over its jet counts at a shaft power [W] and head [m]."""
    best = np.nan
    for jets in range(1, model.geometry.jet_count + 1):
        def gap(y: float, jets: int = jets) -> float:
            return float(model.solve(head, physics.speed, y, jets=jets, rho=physics.rho,
                                     g=physics.g).shaft_power) - power
        if gap(1.0) < 0:
            continue  # this jet count cannot reach the power
        y = brentq(gap, 1e-3, 1.0, xtol=1e-12)
        eta = float(model.solve(head, physics.speed, y, jets=jets, rho=physics.rho,
                                g=physics.g).efficiency)
        best = eta if not np.isfinite(best) else max(best, eta)
    return best


def test_pelton_reference_points_are_the_as_built_chart(plants, truth) -> None:
    """Pelton points come from the as-built hill chart (best jet count) and carry no opening."""
    plant = plants["GLF"]
    dh, dq = _half_units("GLF")
    for unit in plant.units:
        if unit.runner_type != "pelton":
            continue
        model, physics = _as_built_from_files(plant, unit, truth)
        chart = physics.chart
        pts = unit.reference_points
        assert all(p.opening is None and p.blade_angle is None for p in pts)
        h = np.array([p.head for p in pts])
        p_w = np.array([p.power for p in pts])
        for name, printed, half in (("efficiency", [p.efficiency for p in pts], 0.5e-4),
                                    ("flow", [p.flow for p in pts], dq)):
            f = getattr(chart, f"{name}_at_power")
            value = f(p_w, h)
            tol = (half + _spread(lambda v, f=f, p=p_w: f(p, v), h, dh)
                   + _spread(lambda v, f=f, h=h: f(v, h), p_w, 50.0))
            assert np.all(np.abs(value - printed) <= 1.05 * tol), (unit.code, name)
        # and the chart is the model: the best jet count and stroke solved directly at each
        # power agree with the printed efficiency within the chart's bilinear interpolation
        # on its 31 heads x 49 loads (1e-3: an estimate for this grid; 2.7e-4 seen)
        best = np.array([_best_pelton(model, physics, p.power, p.head) for p in pts])
        assert np.all(np.abs(best - [p.efficiency for p in pts]) < 1e-3), unit.code
        # the energy balance holds within that same interpolation error (not to the printed
        # digits: see test_reference_points_close_the_energy_balance[pelton])
        product = np.array([physics.rho * physics.g * p.flow * p.head * p.efficiency
                            for p in pts])
        assert np.all(np.abs(product / p_w - 1) < 1e-3), unit.code


@pytest.mark.parametrize("runner", ["francis", "kaplan", "pelton"])
def test_reference_points_close_the_energy_balance(plants, runner: str) -> None:
    """P = rho g Q H eta at the reference charts' water (IAPWS-IF97, 10 degC, 1 atm) and g:
    an acceptance test's efficiency is defined by that product (IEC 60041)."""
    # reference: the `iapws` registry package (IAPWS-IF97); 999.70 kg/m3 at 10 degC is also
    # the handbook value (from memory)
    rho = IAPWS97(T=REFERENCE_WATER_TEMPERATURE, P=0.101325).rho
    assert rho == pytest.approx(999.70, abs=0.01)
    assert unit_physics("GLF", "MG1").rho == pytest.approx(rho, rel=1e-10)
    checked = 0
    for plant in plants.values():
        dh, dq = _half_units(plant.plant.code)
        for unit in plant.units:
            if unit.runner_type != runner:
                continue
            for p in unit.reference_points:
                # every printed quantity carries half a unit of its last digit
                tol = 50.0 / p.power + dq / p.flow + dh / p.head + 0.5e-4 / p.efficiency
                assert p.power == pytest.approx(rho * REFERENCE_G * p.flow * p.head
                                                * p.efficiency, rel=tol), (unit.code, p)
                checked += 1
    assert checked >= 20


# --------------------------------------------------------------------------- truth: units
def test_truth_describes_the_as_built_units(truth, plants, sims) -> None:
    units = {(u["plant"], u["unit"]): u for u in truth["units"]}
    assert len(units) == 7
    for (plant_code, code), entry in units.items():
        spec = plants[plant_code].unit(code)
        physics = unit_physics(plant_code, code)
        # the as-built coefficients are the generator's model, and differ from the typical
        # ones the service starts from by the invented as-built factors (so it has a fit to do)
        assert entry["as_built_coefficients"] == pytest.approx(
            dict(physics.model.coefficients), rel=1e-9, abs=1e-9)
        typical = runner_model(spec, rho=physics.rho, g=physics.g).coefficients
        factors = AS_BUILT_FACTORS[spec.runner_type]
        for name, value in entry["as_built_coefficients"].items():
            assert value == pytest.approx(typical[name] * factors.get(name, 1.0), rel=1e-6)
        # the stated BEP is the chart's at rated head, to the printed digits
        bep = physics.chart.best_efficiency_point(spec.rated_head)
        assert entry["as_built_bep"]["efficiency"] == pytest.approx(bep.efficiency, abs=5e-7)
        assert entry["as_built_bep"]["power_w"] == pytest.approx(bep.power, abs=0.05)
        assert entry["as_built_bep"]["flow_m3_s"] == pytest.approx(bep.flow, abs=5e-5)
        op = sims[plant_code].units[code]
        assert entry["hours_online"] == pytest.approx(op.online.sum() / SAMPLES_PER_HOUR,
                                                      abs=0.05)
        if spec.runner_type != "kaplan":
            assert entry["mean_off_cam_effect_points"] == 0.0
        assert "hill_rms_residual" not in entry
    physics_text = truth["physics"]
    assert "IAPWS-IF97" in physics_text["water_density"]
    assert "IEC 60041" in physics_text["gravity"]
    assert physics_text["cam_mistune_deg"] == {f"{p}/{u}": v
                                               for (p, u), v in CAM_MISTUNE_DEG.items()}
    assert physics_text["cam_mistune_deg"] == {"LBD/U2": 1.5}
    # degradation: the gradual one runs from the default start, the step is outside 14 days
    assert units[("LBD", "U3")]["condition"] == "gradual"
    assert units[("LBD", "U3")]["rate_points_per_year"] == 1.5
    assert units[("LBD", "U3")]["in_span"] is True
    assert units[("GLF", "MG2")]["condition"] == "step"
    assert units[("GLF", "MG2")]["step_points"] == 2.0
    assert units[("GLF", "MG2")]["since"] == "2026-06-01T10:00:00Z"
    assert units[("GLF", "MG2")]["in_span"] is False
    healthy = {k for k, u in units.items() if u["condition"] == "healthy"}
    assert healthy == set(units) - {("LBD", "U3"), ("GLF", "MG2")}


# --------------------------------------------------------------------------- Kaplan cam
def test_installed_cam_is_the_optimum_except_the_planted_mistune(plants) -> None:
    cams = {u.code: np.array(u.geometry.cam) for u in plants["LBD"].units}
    y, h = cams["U1"][:, 0], cams["U1"][:, 1]
    assert all(np.array_equal(c[:, :2], cams["U1"][:, :2]) for c in cams.values())
    # U2's cam is U1's plus 1.5 deg from opening 0.5 up (truth.json), the same below;
    # both rows are printed to 0.01 deg
    shift = cams["U2"][:, 2] - cams["U1"][:, 2]
    assert np.allclose(shift[y >= 0.5], 1.5, atol=0.011)
    assert np.allclose(shift[y < 0.5], 0.0, atol=0.011)
    assert np.array_equal(cams["U1"], cams["U3"])
    physics = unit_physics("LBD", "U1")
    model, w, rho, g = physics.model, physics.speed, physics.rho, physics.g
    optimum = np.rad2deg(model.optimal_blade_angle(h, w, y, rho=rho, g=g))
    # U1's cam is the as-built model's own optimum, to the printed 0.01 deg
    assert np.max(np.abs(cams["U1"][:, 2] - optimum)) < 0.006
    # and brute force agrees: 0.25 deg either side of the cam loses efficiency at every node
    on = model.solve(h, w, y, blade_angle=np.deg2rad(cams["U1"][:, 2]), rho=rho, g=g)
    for step in (-0.25, 0.25):
        off = model.solve(h, w, y, blade_angle=np.deg2rad(cams["U1"][:, 2] + step),
                          rho=rho, g=g)
        assert np.all(off.efficiency < on.efficiency)
    # re-tuning U2 (taking the 1.5 deg back off) gains efficiency where it is mistuned
    mistuned = np.deg2rad(cams["U2"][:, 2])
    e_now = model.solve(h, w, y, blade_angle=mistuned, rho=rho, g=g).efficiency
    e_back = model.solve(h, w, y, blade_angle=mistuned - np.deg2rad(1.5), rho=rho,
                         g=g).efficiency
    assert np.all(e_back[y >= 0.5] - e_now[y >= 0.5] > 5e-4)


def test_blade_angle_follows_the_installed_cam_within_the_governor_error(lbd_60) -> None:
    sim, tags = lbd_60, _tags(lbd_60)
    sigma_deg, phi = CAM_FOLLOWING  # the scenario's governor error (invented)
    for code, op in sim.units.items():
        on = op.online
        physics = unit_physics("LBD", code)
        cam = physics.model.geometry.cam_angle
        for signals, noise in ((sim.clean, 0.0), (sim.measured, 0.05)):
            blade = signals[tags[(code, "blade_angle")]][on]
            opening = signals[tags[(code, "gate_opening")]][on]
            error = np.rad2deg(blade - cam(opening, op.net_head[on]))
            # AR(1) of std 0.6 deg and lag-one correlation 0.9 over ~6900-7800 online
            # samples: an effective count of ~N (1 - 0.9)/(1 + 0.9) ~ 360, so the mean is
            # within 0.1 deg (3 standard errors) and the std within 15 % (~6 standard errors);
            # measured signals add 0.05 deg of angle noise, and the opening's 0.001 noise moves
            # the cam by far less
            assert abs(error.mean()) < 0.1, code
            assert 0.85 * np.hypot(sigma_deg, noise) < error.std() < 1.15 * sigma_deg + noise
            assert np.max(np.abs(error)) < 5 * sigma_deg + 3 * noise
            if noise == 0.0:
                lag1 = np.corrcoef(error[:-1], error[1:])[0, 1]
                assert lag1 == pytest.approx(phi, abs=0.05)
        # the off-cam effect in the truth is the model solved at the exported blade angle
        # minus on cam, at the exported opening (clean signals); the generator evaluates it
        # at the on-cam net head and then re-solves the head for the off-cam flow, a few mm,
        # which moves the effect by well under 1e-5
        blade = sim.clean[tags[(code, "blade_angle")]][on]
        opening = sim.clean[tags[(code, "gate_opening")]][on]
        h = op.net_head[on]
        off = physics.model.solve(h, physics.speed, opening, blade_angle=blade,
                                  rho=physics.rho, g=physics.g).efficiency
        on_cam = physics.model.solve(h, physics.speed, opening, rho=physics.rho,
                                     g=physics.g).efficiency
        assert np.allclose(off - on_cam, op.off_cam_effect[on], rtol=0, atol=1e-5)
        # on an optimal cam a blade-angle error can only cost efficiency (to ~1e-6: the cam is
        # printed to 0.01 deg and interpolated between its nodes); on U2's mistuned cam it may
        # also gain, when the error points back toward the optimum
        if code == "U2":
            assert np.max(op.off_cam_effect[on]) > 0
        else:
            assert np.max(op.off_cam_effect[on]) < 1e-5
        assert np.mean(op.off_cam_effect[on]) < 0
        assert np.all(np.abs(op.off_cam_effect[on]) < 0.03)


def test_truth_mean_off_cam_effect_matches_the_exported_blade_angle(sims, truth) -> None:
    sim, tags = sims["LBD"], _tags(sims["LBD"])
    for entry in truth["units"]:
        if entry["plant"] != "LBD":
            continue
        code = entry["unit"]
        op = sim.units[code]
        on = op.online
        physics = unit_physics("LBD", code)
        blade = sim.clean[tags[(code, "blade_angle")]][on]
        opening = sim.clean[tags[(code, "gate_opening")]][on]
        off = physics.model.solve(op.net_head[on], physics.speed, opening, blade_angle=blade,
                                  rho=physics.rho, g=physics.g).efficiency
        on_cam = physics.model.solve(op.net_head[on], physics.speed, opening,
                                     rho=physics.rho, g=physics.g).efficiency
        # printed to 4 decimals of a point
        assert entry["mean_off_cam_effect_points"] == pytest.approx(
            100 * np.mean(off - on_cam), abs=5.1e-5)


# --------------------------------------------------------------------------- time zones
def _distinct_times(path: Path, tag: str) -> list[str]:
    with path.open(encoding="utf-8") as f:
        return [row[0] for row in csv.reader(f) if len(row) > 1 and row[1] == tag]


def test_local_export_repeats_the_fall_back_hour(tmp_path: Path) -> None:
    manifest = generate_demo(tmp_path, days=4, start=datetime(2026, 10, 30, tzinfo=UTC))
    nov = next(p for p in manifest.export_files if p.name == "lantern_bend_2026-11.csv")
    times = _distinct_times(nov, "LBD.FB.ELEV.FT")
    day = [t[11:] for t in times if t.startswith("11/01/2026 0")]
    first_hour = [f"01:{m:02d}" for m in range(0, 60, 10)]
    expected = ([f"00:{m:02d}" for m in range(0, 60, 10)] + first_hour + first_hour
                + [f"{h:02d}:{m:02d}" for h in range(2, 10) for m in range(0, 60, 10)])
    # US Central time falls back at 02:00 CDT on 2026-11-01 (US federal DST rule, from memory)
    assert day == expected
    per_tag = sum(len(_distinct_times(p, "LBD.FB.ELEV.FT")) for p in manifest.export_files
                  if "lantern" in p.name)
    assert per_tag == 4 * 24 * SAMPLES_PER_HOUR  # no sample lost or doubled


def test_local_export_skips_the_spring_forward_hour(tmp_path: Path) -> None:
    manifest = generate_demo(tmp_path, days=4, start=datetime(2026, 3, 6, tzinfo=UTC))
    march = next(p for p in manifest.export_files if p.name == "lantern_bend_2026-03.csv")
    times = _distinct_times(march, "LBD.FB.ELEV.FT")
    assert not any(t.startswith("03/08/2026 02:") for t in times)
    i = times.index("03/08/2026 01:50")
    assert times[i + 1] == "03/08/2026 03:00"
    assert len(times) == len(set(times))  # nothing repeats in spring


def test_offset_export_times_land_on_the_utc_grid(demo, truth) -> None:
    glf = [p for p in demo.export_files if "glimmerfels" in p.name]
    frames = [pd.read_csv(p, sep=";", decimal=",", skiprows=1, dtype={"Zeitstempel": str})
              for p in glf]
    stamps = pd.to_datetime(pd.concat(frames)["Zeitstempel"], format="ISO8601", utc=True)
    grid = pd.date_range(truth["start"], truth["end"], freq="10min", inclusive="left")
    gap = next(f for f in truth["faults"] if f["kind"] == "gap")
    missing = grid.difference(pd.DatetimeIndex(stamps))
    assert len(missing) == gap["rows_absent"] == 30
    assert missing[0] == pd.Timestamp(gap["first_time_utc"])
    assert missing[-1] == pd.Timestamp(gap["last_time_utc"])
    assert stamps.is_monotonic_increasing


# --------------------------------------------------------------------------- physics
def _wgs84_gravity(latitude_deg: float, elevation_m: float) -> float:
    """Normal gravity on the WGS 84 ellipsoid (Somigliana closed form) less the free-air
    gradient 3.086e-6 s^-2 (NIMA TR8350.2 constants and the free-air gradient, from memory).
    An independent formula to hold the IEC 60041 one against."""
    s2 = np.sin(np.radians(latitude_deg)) ** 2
    g_e, k, e2 = 9.7803253359, 0.00193185265241, 0.00669437999013
    return float(g_e * (1 + k * s2) / np.sqrt(1 - e2 * s2) - 3.086e-6 * elevation_m)


def test_site_water_density_and_gravity(sims) -> None:
    for sim in sims.values():
        site = sim.plant.plant
        g_iec = float(local_gravity(sim.design.latitude, sim.design.elevation_m))
        # the plant file prints the elevation to 0.1 ft (LBD) or 0.1 m: 1e-8 relative in g
        assert float(local_gravity(site.latitude, site.elevation)) == pytest.approx(
            g_iec, rel=1e-8)
        # IEC 60041 formula vs WGS 84 normal gravity with a free-air correction: the two
        # agree to ~2e-4 m/s2 at these latitudes (computed from both formulas, from memory)
        assert g_iec == pytest.approx(_wgs84_gravity(site.latitude, site.elevation), abs=3e-4)
        assert 9.79 < g_iec < 9.81
        p_atm = float(atmospheric_pressure(site.elevation))
        for unit_code, op in sim.units.items():
            assert op.g == g_iec  # the site's gravity, not the charts' 9.81
            on = np.flatnonzero(op.online)
            assert on.size > 100, unit_code  # every unit ran in the fortnight
            for i in on[:: on.size // 8][:8]:
                t_k = float(sim.water_temperature[i])
                # reference: iapws.IAPWS97 (registry package) at the water temperature and
                # the mean pressure of the high- and low-pressure sections (truth.json)
                lo = IAPWS97(T=t_k, P=p_atm / MPA).rho
                p_mean = p_atm + 0.5 * lo * g_iec * op.gross_head[i]
                assert op.rho[i] == pytest.approx(IAPWS97(T=t_k, P=p_mean / MPA).rho, rel=1e-5)
                hi = IAPWS97(T=t_k, P=(p_atm + lo * g_iec * op.gross_head[i]) / MPA).rho
                assert lo < op.rho[i] < hi
        # December water at 0.5-10 degC (invented scenario) is near its density maximum,
        # 999.7-1000.0 kg/m3 at 1 atm (handbook, from memory); compressibility ~0.5 kg/m3 per
        # MPa (from memory) adds up to ~1.3 kg/m3 at Glimmerfels' ~2.5 MPa mean pressure
        assert np.all((sim.water_temperature > 273.65) & (sim.water_temperature < 283.15))
        for op in sim.units.values():
            assert np.all((op.rho > 999.7) & (op.rho < 1001.6))


def test_energy_balance_holds_at_the_noise_free_level(sims) -> None:
    for sim in sims.values():
        tags = _tags(sim)
        for code, op in sim.units.items():
            unit = sim.plant.unit(code)
            on = op.online
            # generator efficiency: the plant file's curve, piecewise linear (IEC 60041 takes
            # the manufacturer's curve as supplied)
            curve = unit.generator_efficiency
            eta_gen = np.interp(op.generator_power, [p.power for p in curve],
                                [p.efficiency for p in curve])
            assert np.allclose(op.generator_efficiency[on], eta_gen[on], rtol=1e-15)
            assert np.allclose(op.turbine_power[on], op.generator_power[on] / eta_gen[on],
                               rtol=1e-12)
            rebuilt = op.rho * op.g * op.flow * op.net_head * op.turbine_efficiency * eta_gen
            # P_gen = rho g Q H eta eta_gen: closed by construction, only round-off remains
            assert np.allclose(rebuilt[on], op.generator_power[on], rtol=1e-12, atol=0)
            # truth = reference on cam + off-cam effect - degradation
            assert np.allclose(op.turbine_efficiency[on], op.reference_efficiency[on]
                               + op.off_cam_effect[on] - op.degradation[on], rtol=0,
                               atol=1e-14)
            # the reference is the as-built chart at the turbine power and net head
            chart = unit_physics(sim.design.code, code).chart
            assert np.allclose(op.reference_efficiency[on],
                               chart.efficiency_at_power(op.turbine_power, op.net_head)[on],
                               rtol=0, atol=1e-14)
            # gross head: headwater minus tailwater, or minus the jet circle for a Pelton
            low = (np.maximum(unit.runner_reference_elevation, sim.tailwater)
                   if unit.runner_type == "pelton" else sim.tailwater)
            assert np.allclose(op.gross_head, sim.headwater - low, rtol=0, atol=1e-12)
            assert np.all(op.flow[~on] == 0) and np.all(op.generator_power[~on] == 0)
            # the noise-free Winter-Kennedy signal gives the flow back: dp = (Q/k)^(1/n)
            dp = sim.clean[tags[(code, "wk_differential_pressure")]]
            flow = unit.winter_kennedy_coefficient * dp**unit.winter_kennedy_exponent
            assert np.allclose(flow, op.flow, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("runner", ["francis", "pelton", "kaplan"])
def test_net_head_is_gross_head_less_the_penstock_loss(sims, runner: str) -> None:
    checked = 0
    for sim in sims.values():
        for code, op in sim.units.items():
            unit = sim.plant.unit(code)
            if unit.runner_type != runner:
                continue
            # net head = gross - k_p Q^2, converged to 1e-9 m in the generator's iteration:
            # what an index test computes from the exported levels and flow
            assert np.allclose(op.net_head, op.gross_head - unit.penstock_loss_coefficient
                               * op.flow**2, rtol=0, atol=1e-8), code
            checked += 1
    assert checked >= 2


def test_physical_magnitudes_are_plausible(sims, truth, plants) -> None:
    for sim in sims.values():
        for code, op in sim.units.items():
            unit = sim.plant.unit(code)
            on = op.online
            load = op.generator_power / unit.rated_power
            normal = on & (load >= 0.4)
            assert normal.sum() > 100
            # turbine efficiency at 40-100 % load: 80-96 % for large units (textbook range,
            # from memory)
            assert np.all((op.turbine_efficiency[normal] > 0.80)
                          & (op.turbine_efficiency[normal] < 0.96)), code
            assert np.all((op.generator_efficiency[on] > 0.95)
                          & (op.generator_efficiency[on] < 0.99))
            assert np.all(load[on] <= 1.0 + 1e-12)
            if unit.runner_type == "pelton":
                jets = op.jets[on]
                assert set(np.unique(jets)) <= set(range(1, unit.geometry.jet_count + 1))
                # more jets run at higher loads (jets switch off at part load)
                assert jets[load[on] > 0.85].mean() >= jets[load[on] < 0.6].mean()
                assert np.all(op.jets[~on] == 0)
            else:
                assert np.all(op.jets == 0)
            # the regulating organ is within its travel while online, closed when stopped
            assert np.all((op.opening[on] > 0.05) & (op.opening[on] <= 1.0))
            assert np.all(op.opening[~on] == 0.0)
    # best efficiencies by runner type (textbook ranges for large modern units, from memory:
    # Francis 93-96 %, Kaplan 92-95 %, Pelton 90-93 %)
    ranges = {"francis": (0.925, 0.96), "kaplan": (0.915, 0.95), "pelton": (0.895, 0.93)}
    for entry in truth["units"]:
        low, high = ranges[entry["runner_type"]]
        assert low < entry["as_built_bep"]["efficiency"] < high, entry["unit"]
        unit = plants[entry["plant"]].unit(entry["unit"])
        rated_turbine = unit.rated_power / float(generator_efficiency(unit, [unit.rated_power])[0])
        share = entry["as_built_bep"]["power_w"] / rated_turbine
        # reaction turbines have their BEP below rating: Francis ~80-95 %, Kaplan ~70-90 %
        # of rated turbine power (common practice). The Pelton model peaks at full stroke
        # (a limitation its docstring states), so its BEP location is not checked.
        if entry["runner_type"] == "francis":
            assert 0.80 <= share <= 0.95, (entry["unit"], share)
        elif entry["runner_type"] == "kaplan":
            assert 0.70 <= share <= 0.90, (entry["unit"], share)
    # Pelton bucket speed: U / sqrt(2 g H) ~ 0.45-0.48 at rated head (textbook: U/c1 0.46-0.48
    # with c1 = Cv sqrt(2 g H), Cv ~ 0.97-0.99; from memory)
    for unit in GLIMMERFELS.units:
        if unit.runner_type == "pelton":
            u = unit.rated_speed_rpm * 2 * np.pi / 60 * unit.runner_diameter_m / 2
            ratio = u / np.sqrt(2 * REFERENCE_G * unit.rated_head_m)
            assert 0.44 <= ratio <= 0.48, ratio


def test_flow_meter_in_the_export_closes_the_energy_balance(demo, plants) -> None:
    """Index efficiency from the export alone (power, flow meter, levels, water temperature)
    matches the as-built reference within the sensor noise on healthy MG1."""
    plant = plants["GLF"]
    unit = plant.unit("MG1")
    frames = [pd.read_csv(p, sep=";", decimal=",", skiprows=1)
              for p in demo.export_files if "glimmerfels" in p.name]
    df = pd.concat(frames).apply(pd.to_numeric, errors="coerce").replace(-9999, np.nan)
    power = (df["GLF/MG1/P"] * 1e6).to_numpy()
    flow = df["GLF/MG1/Q"].to_numpy()
    gross = (df["GLF/OW/H"] - df["GLF/UW/H"]).to_numpy()
    head = gross - unit.penstock_loss_coefficient * flow**2
    t_k = df["GLF/MG1/T_W"].to_numpy() + 273.15
    g = local_gravity(plant.plant.latitude, plant.plant.elevation)
    p_atm = atmospheric_pressure(plant.plant.elevation)
    # water density (IAPWS-IF97) at the mean pressure of the two reference sections
    rho = density(t_k, p_atm + 0.5 * 1000.0 * g * gross)
    ok = (power > 0.5 * unit.rated_power) & np.isfinite(flow) & np.isfinite(head)
    p_turb = power / generator_efficiency(unit, power)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta_i = p_turb / (rho * g * flow * head)
    eta_ref = unit_physics("GLF", "MG1").chart.efficiency_at_power(p_turb, head)
    deviation = (eta_i - eta_ref)[ok]
    assert ok.sum() > 500
    # MG1 is healthy: with 0.1 % power and 0.3 % flow noise per sample the median of the
    # deviation over >500 samples is well inside 0.1 point (invented noise levels)
    assert abs(np.median(deviation)) < 1e-3
    assert deviation.std() < 0.01


# --------------------------------------------------------------------------- degradation
def _index_deficit(sim, code: str, measured: bool) -> tuple[np.ndarray, np.ndarray]:
    """Years since start and (reference + off-cam effect - index efficiency), from the
    exported signals: WK dp, levels, power, opening and blade angle (online samples).

    Noise-free signals use the truth's density and gravity; measured ones IAPWS-IF97 at the
    measured water temperature and the site's gravity, as an index test would.
    """
    unit = sim.plant.unit(code)
    op = sim.units[code]
    physics = unit_physics(sim.design.code, code)
    signals = sim.measured if measured else sim.clean
    tag = _tags(sim)
    power = signals[tag[(code, "active_power")]]
    on = power > 0.5 * unit.rated_power
    dp = np.clip(signals[tag[(code, "wk_differential_pressure")]], 0, None)
    flow = unit.winter_kennedy_coefficient * dp**unit.winter_kennedy_exponent
    low = np.maximum(unit.runner_reference_elevation, signals[tag[("*", "tailwater_level")]]) \
        if unit.runner_type == "pelton" else signals[tag[("*", "tailwater_level")]]
    gross = signals[tag[("*", "headwater_level")]] - low
    head = gross - unit.penstock_loss_coefficient * flow**2
    p_turb = power / generator_efficiency(unit, power)
    if measured:
        site = sim.plant.plant
        g = local_gravity(site.latitude, site.elevation)
        rho = density(signals[tag[(code, "water_temperature")]],
                      atmospheric_pressure(site.elevation) + 0.5 * 1000.0 * g * gross)
    else:
        rho, g = op.rho, op.g
    with np.errstate(divide="ignore", invalid="ignore"):
        eta_i = p_turb / (rho * g * flow * head)
    reference = physics.chart.efficiency_at_power(p_turb, head)
    if unit.runner_type == "kaplan":
        y = signals[tag[(code, "gate_opening")]][on]
        blade = signals[tag[(code, "blade_angle")]][on]
        h = head[on]
        off = physics.model.solve(h, physics.speed, y, blade_angle=blade, rho=physics.rho,
                                  g=physics.g).efficiency
        on_cam = physics.model.solve(h, physics.speed, y, rho=physics.rho,
                                     g=physics.g).efficiency
        reference[on] += off - on_cam
    years = sim.cal.seconds / YEAR_S
    return years[on], (reference - eta_i)[on]


def test_degrading_unit_loses_1_5_points_per_year(lbd_60) -> None:
    sim = lbd_60
    condition = next(c for c in CONDITIONS if (c.plant, c.unit) == ("LBD", "U3"))
    assert condition.since == DEFAULT_START and condition.kind == "gradual"
    years = sim.cal.seconds / YEAR_S
    for code, op in sim.units.items():
        on = op.online
        # the noise-free truth: reference minus turbine efficiency plus the off-cam effect
        # (the governor's blade error, counted in the truth's turbine efficiency)
        lost = (op.reference_efficiency - op.turbine_efficiency + op.off_cam_effect)[on]
        if code == "U3":
            slope, intercept = np.polyfit(years[on], lost * 100, 1)
            assert slope == pytest.approx(1.5, abs=1e-9)
            assert intercept == pytest.approx(0.0, abs=1e-9)
            # and point by point: 1.5 points per Julian year since the default start
            assert np.allclose(lost, 0.015 * years[on], rtol=0, atol=1e-12)
        else:
            assert np.all(np.abs(lost) < 1e-14), code
    # from the noise-free exported signals (Kaplan net head carries the generator's mm-size
    # head error, see test_net_head_is_gross_head_less_the_penstock_loss: 1e-3 covers it)
    years_on, deficit = _index_deficit(sim, "U3", measured=False)
    assert np.allclose(deficit, 0.015 * years_on, rtol=0, atol=1e-3)
    assert np.polyfit(years_on, deficit * 100, 1)[0] == pytest.approx(1.5, abs=0.05)
    # with sensor noise over 60 days: across seeds (1-4, 20261201) the slope scattered by
    # ~0.08 pt/yr around the truth, so 0.3 pt/yr is a ~4-sigma band (estimated here for the
    # invented noise levels)
    years_on, deficit = _index_deficit(sim, "U3", measured=True)
    assert np.polyfit(years_on, deficit * 100, 1)[0] == pytest.approx(1.5, abs=0.3)
    years_on, deficit = _index_deficit(sim, "U1", measured=True)
    assert np.polyfit(years_on, deficit * 100, 1)[0] == pytest.approx(0.0, abs=0.3)


def test_step_unit_loses_2_points_on_its_date(plants) -> None:
    start = datetime(2026, 5, 25, tzinfo=UTC)
    glf = simulate_plant(GLIMMERFELS, plants["GLF"], start=start, days=14, seed=SEED)
    step = datetime(2026, 6, 1, 10, tzinfo=UTC)  # scenario.CONDITIONS, stated date
    condition = next(c for c in CONDITIONS if (c.plant, c.unit) == ("GLF", "MG2"))
    assert condition.since == step and condition.step_points == 2.0
    step_years = (step - start).total_seconds() / YEAR_S
    years = glf.cal.seconds / YEAR_S
    for code, op in glf.units.items():
        on = op.online
        lost = (op.reference_efficiency - op.turbine_efficiency + op.off_cam_effect)[on]
        if code != "MG2":
            assert np.all(np.abs(lost) < 1e-14), code
            continue
        before, after = lost[years[on] < step_years], lost[years[on] >= step_years]
        assert before.size > 50 and after.size > 50
        assert np.allclose(before, 0.0, rtol=0, atol=1e-14)
        assert np.allclose(after, 0.02, rtol=0, atol=1e-14)
    # the same from the noise-free exported signals (Francis: exact to the 1e-9 m net head
    # convergence)
    years_on, deficit = _index_deficit(glf, "MG2", measured=False)
    before, after = deficit[years_on < step_years], deficit[years_on >= step_years]
    assert before.size > 50 and after.size > 50
    assert np.allclose(before, 0.0, atol=1e-9)
    assert np.allclose(after, 0.02, atol=1e-9)
    # and with sensor noise: the median of each side is within 0.1 point (invented noise)
    years_on, deficit = _index_deficit(glf, "MG2", measured=True)
    before, after = deficit[years_on < step_years], deficit[years_on >= step_years]
    assert np.median(after) - np.median(before) == pytest.approx(0.02, abs=1e-3)


# --------------------------------------------------------------------------- faults
def _lines(root: Path, file: str) -> list[str]:
    return (root / file).read_text(encoding="utf-8").split("\n")


def _cell(root: Path, fault: dict, line: int) -> str:
    text = _lines(root, fault["file"])[line - 1]
    if fault["plant"] == "GLF":
        header = _lines(root, fault["file"])[1].split(";")
        return text.split(";")[header.index(fault["column"])]
    return text.split(",")[2]


def test_truth_lists_every_fault_in_the_files(demo, truth) -> None:
    root = demo.root
    assert len(truth["faults"]) == len(FAULTS)
    for fault in truth["faults"]:
        kind = fault["kind"]
        if fault["plant"] == "LBD" and kind != "bad_timestamp":
            text = _lines(root, fault["file"])
            for line, block in zip(fault["lines"], fault["timestamp_block_lines"], strict=True):
                # the block starts with the first tag, at the faulty row's time
                assert text[block - 1].split(",")[1] == "LBD.FB.ELEV.FT"
                assert text[block - 1].split(",")[0] == text[line - 1].split(",")[0]
                assert block <= line < block + 44
        if kind in ("sentinel", "text"):
            assert _cell(root, fault, fault["lines"][0]) == fault["raw"]
        elif kind == "stuck":
            values = {_cell(root, fault, ln) for ln in fault["lines"]}
            assert values == {fault["raw"]} and len(fault["lines"]) == 42
            assert all(_lines(root, fault["file"])[ln - 1].split(",")[1] == fault["tag"]
                       for ln in fault["lines"])
        elif kind == "bad_timestamp":
            for ln, raw in zip(fault["lines"], fault["raw"], strict=True):
                assert _lines(root, fault["file"])[ln - 1].startswith(raw + ",")
        elif kind == "spike":
            line = fault["lines"][0]
            here = float(_cell(root, fault, line).replace(",", "."))
            around = [float(_cell(root, fault, ln).replace(",", "."))
                      for ln in (line - 2, line - 1, line + 1, line + 2)]
            # the spike stands out from its neighbours by at least half its size (the
            # signal itself moves far less in 20 minutes)
            mapping = next(p for p in map(load_plant_file, demo.plant_files)
                           if p.plant.code == "GLF").tags[fault["tag"]]
            size = fault["magnitude_si"] / mapping.to_si()[0]
            assert here - np.median(around) > 0.5 * size
    # and nothing else in the files looks like a fault
    sentinel = text = bad_stamps = 0
    for path in demo.export_files:
        lines = path.read_text(encoding="utf-8").split("\n")
        if "glimmerfels" in path.name:
            rows = [ln.split(";") for ln in lines[2:] if ln]
            cells = [c for r in rows for c in r[1:]]
            stamps = [r[0] for r in rows]
            parse = pd.to_datetime(pd.Series(stamps), format="ISO8601", utc=True,
                                   errors="coerce")
        else:
            rows = [ln.split(",") for ln in lines[1:] if ln]
            cells = [r[2] for r in rows]
            parse = pd.to_datetime(pd.Series([r[0] for r in rows]), format="%m/%d/%Y %H:%M",
                                   errors="coerce")
        sentinel += sum(c == "-9999" for c in cells)
        text += sum(c == "n/a" for c in cells)
        bad_stamps += int(parse.isna().sum())
    counts = truth["fault_counts"]
    assert (sentinel, text, bad_stamps) == (counts["sentinel"], counts["text"],
                                            counts["bad_timestamp"]) == (4, 2, 2)
    assert counts == {"sentinel": 4, "spike": 3, "gap": 30, "text": 2, "stuck": 42,
                      "bad_timestamp": 2}


def test_no_accidental_flat_lines(demo, plants) -> None:
    """Only the planted stuck sensor repeats a value 6 times or more (stopped machines'
    exact zeros of power, speed and opening excepted, as truth.json says)."""
    runs = []
    for path in demo.export_files:
        if "lantern" not in path.name:
            continue
        df = pd.read_csv(path, dtype={"Value": str})
        for tag, values in df.groupby("Tag", sort=False)["Value"]:
            if plants["LBD"].tags[tag].signal in ("active_power", "rotational_speed",
                                                  "gate_opening"):
                continue
            v = values.to_numpy()
            change = np.flatnonzero(v[1:] != v[:-1])
            lengths = np.diff(np.concatenate([[-1], change, [v.size - 1]]))
            runs += [(tag, int(n)) for n in lengths if n >= 6]
    assert runs == [("LBD.TW.ELEV.FT", 42)]


# --------------------------------------------------------------------------- signatures
#: The planted condition-monitoring episodes as the scenario states them (UTC, exact).
STATED_SIGNATURES = [
    ("LBD", "U1", "vortex_rope", "2026-03-09T14:00:00Z", "2026-03-16T14:00:00Z"),
    ("GLF", "MG4", "bearing", "2026-06-08T06:00:00Z", "2026-06-29T06:00:00Z"),
    ("LBD", "U2", "cavitation", "2026-07-27T13:00:00Z", "2026-07-30T13:00:00Z"),
    ("LBD", "U2", "cavitation", "2026-08-31T13:00:00Z", "2026-09-04T13:00:00Z"),
    ("LBD", "U2", "cavitation", "2026-10-05T13:00:00Z", "2026-10-07T13:00:00Z"),
]
BASELINE = pd.Timedelta(weeks=8)  # a detector's default healthy baseline from the start
#: After an episode the bearing temperatures still carry its lag (tau 45 min): 24 h is
#: 32 time constants, e^-32 of a few K is far below any tolerance used here.
LAG_MARGIN = pd.Timedelta(hours=24)
GRAVITY_STANDARD = 9.80665  # [m/s2] standard gravity g_n (3rd CGPM 1901, a definition)
PSI = 4.4482216152605 / 0.0254**2  # [Pa] lbf/in2 from the definitions of lbf and inch


def _iso(moment: datetime) -> str:
    return moment.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _window(sim, start, end) -> np.ndarray:
    t = sim.cal.times
    return np.asarray((t >= pd.Timestamp(start)) & (t < pd.Timestamp(end)))


def _load(sim, code: str) -> np.ndarray:
    return sim.units[code].generator_power / sim.plant.unit(code).rated_power


def _mine(plant: str, kind: str | None = None) -> list:
    return [s for s in SIGNATURES if s.plant == plant and kind in (None, s.signature)]


@pytest.fixture(scope="module")
def year(plants) -> dict:
    """A year of each plant with the planted signatures, and the same year (same seed)
    without them: (with, without) by plant code."""
    out = {}
    for design in (GLIMMERFELS, LANTERN_BEND):
        plant = plants[design.code]
        out[design.code] = (
            simulate_plant(design, plant, start=DEFAULT_START, days=365, seed=SEED),
            simulate_plant(design, plant, start=DEFAULT_START, days=365, seed=SEED,
                           signatures=()))
    return out


def _healthy_hf(sim, code: str) -> np.ndarray:
    """The scenario's healthy HF vibration law, RMS a (0.35 + 0.65 load) [m/s2] (invented)."""
    design = next(u for u in sim.design.units if u.code == code)
    on = sim.units[code].online
    return np.where(on, design.hf_vibration_m_s2 * (0.35 + 0.65 * _load(sim, code)),
                    HF_VIBRATION_STOPPED_M_S2)


def _pulsation_of_head(sim, code: str) -> np.ndarray:
    """Draft-tube pulsation peak to peak over rho g H (net head), the IEC 60193 way of
    scaling pressure fluctuations by the specific hydraulic energy; NaN while stopped."""
    op = sim.units[code]
    tag = _tags(sim)[(code, "draft_tube_pulsation")]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(op.online, sim.clean[tag] / (op.rho * op.g * op.net_head), np.nan)


def _thoma_sigma(tailwater, head, water_k, site_elevation: float, runner_elevation: float,
                 rho: float, g: float) -> np.ndarray:
    """Plant cavitation number sigma = (p_atm/(rho g) - p_v/(rho g) - H_s) / H.

    Thoma's definition (IEC 60193, domain.md section 5), with p_atm from the standard
    atmosphere p = 101325 (1 - 2.25577e-5 z)^5.25588 Pa (ISO 2533 troposphere, from memory)
    and the vapour pressure from iapws.IAPWS97 (registry package) at saturation (x = 0).
    """
    p_atm = 101325.0 * (1.0 - 2.25577e-5 * site_elevation) ** 5.25588
    p_v = np.array([IAPWS97(T=float(t), x=0).P * MPA for t in water_k])
    h_s = runner_elevation - np.asarray(tailwater)
    return (p_atm / (rho * g) - p_v / (rho * g) - h_s) / np.asarray(head)


def test_truth_lists_the_signatures_with_exact_times(truth) -> None:
    listed = truth["signatures"]
    assert [(s["plant"], s["unit"], s["signature"], s["start"], s["end"])
            for s in listed] == STATED_SIGNATURES
    # the declarative source and the truth file agree entry by entry
    assert [(s.plant, s.unit, s.signature, _iso(s.start), _iso(s.end))
            for s in SIGNATURES] == STATED_SIGNATURES
    end_of_year = pd.Timestamp(DEFAULT_START) + pd.Timedelta(days=365)
    for entry, spec in zip(listed, SIGNATURES, strict=True):
        assert set(entry) == {"plant", "unit", "signature", "start", "end", "cause",
                              "magnitude", "in_span"}
        assert entry["magnitude"] == spec.magnitude and entry["cause"] == spec.cause
        assert "invented" in entry["cause"]
        assert entry["in_span"] is False  # the demo's fortnight from 2025-12-01 holds none
        start, end = pd.Timestamp(entry["start"]), pd.Timestamp(entry["end"])
        # every unit's first 8 weeks (a detector's healthy baseline) are clean, and every
        # episode lies inside the default year
        assert start >= pd.Timestamp(DEFAULT_START) + BASELINE
        assert end <= end_of_year
        days = (end - start) / pd.Timedelta(days=1)
        low, high = {"cavitation": (2, 4), "vortex_rope": (5, 10),
                     "bearing": (14, 21)}[entry["signature"]]
        assert low <= days <= high, entry
        for outage in truth["outages"]:  # no episode falls into the unit's planned outage
            if (outage["plant"], outage["unit"]) == (entry["plant"], entry["unit"]):
                assert pd.Timestamp(outage["end"]) <= start or pd.Timestamp(
                    outage["start"]) >= end
    kinds = [s["signature"] for s in listed]
    assert kinds.count("cavitation") == 3 and kinds.count("vortex_rope") == 1
    assert kinds.count("bearing") == 1
    units = {(u["plant"], u["unit"]): u["runner_type"] for u in truth["units"]}
    for entry in listed:
        if entry["signature"] == "cavitation":
            assert units[(entry["plant"], entry["unit"])] == "kaplan"
        if entry["signature"] == "vortex_rope":  # a rope needs a draft tube
            assert units[(entry["plant"], entry["unit"])] in ("francis", "kaplan")
    # the drifting units keep a clean drift truth, and GLF MG1 and MG3 have no signature
    assert {(s["plant"], s["unit"]) for s in listed}.isdisjoint(
        {("LBD", "U3"), ("GLF", "MG2"), ("GLF", "MG1"), ("GLF", "MG3")})
    for a in listed:  # one unit's episodes never overlap
        for b in listed:
            if a is not b and (a["plant"], a["unit"]) == (b["plant"], b["unit"]):
                assert a["end"] <= b["start"] or b["end"] <= a["start"]
    assert "peak-to-peak" in truth["physics"]["condition_monitoring"]


def test_condition_monitoring_tags_parse_to_si(demo, plants, sims) -> None:
    """hf_vibration on every unit, draft_tube_pulsation where there is a draft tube; their
    plant units convert exactly and ingestion reads the exported values back."""
    factors = {"GLF": {"hf_vibration": ("m/s**2", 1.0), "draft_tube_pulsation": ("kPa", 1e3)},
               "LBD": {"hf_vibration": ("g_n", GRAVITY_STANDARD),
                       "draft_tube_pulsation": ("psi", PSI)}}
    new_tags: dict[str, list[tuple[str, str, str, float]]] = {}
    for code, plant in plants.items():
        design = plant_design(code)
        for unit in plant.units:
            mine = {m.signal: (t, m) for t, m in plant.tags.items() if m.unit == unit.code}
            assert "hf_vibration" in mine
            assert ("draft_tube_pulsation" in mine) == (unit.runner_type != "pelton")
            for signal in ("hf_vibration", "draft_tube_pulsation"):
                if signal not in mine:
                    continue
                tag, mapping = mine[signal]
                uom, factor = factors[code][signal]
                assert mapping.uom == uom
                assert mapping.to_si() == pytest.approx((factor, 0.0), rel=1e-12, abs=1e-12)
                decimals = next(t.decimals for t in design.tags if t.tag == tag)
                new_tags.setdefault(code, []).append(
                    (unit.code, signal, tag, 0.5 * 10.0**-decimals * factor))
    assert len(new_tags["GLF"]) == 4 + 2 and len(new_tags["LBD"]) == 3 * 2
    checked = 0
    for path in demo.export_files:
        code = "GLF" if "glimmerfels" in path.name else "LBD"
        sim = sims[code]
        frame = pd.concat([c.frame for c in iter_canonical_chunks(path, plants[code],
                                                                  FileReport(path.name))])
        for unit_code, signal, tag, half in new_tags[code]:
            rows = frame[frame["unit"] == unit_code]
            index = sim.cal.times.get_indexer(pd.DatetimeIndex(rows["ts"]))
            assert (index >= 0).all()
            # read back to the printed digit (half of it, plus the float's round-off)
            read = rows[signal].to_numpy()
            assert np.all(np.abs(read - sim.measured[tag][index]) <= 1.001 * half + 1e-12), tag
            assert np.all(read >= 0.0)  # RMS and peak-to-peak levels are never negative
            checked += read.size
    assert checked == 12 * DAYS * 24 * SAMPLES_PER_HOUR - 6 * 30  # GLF's 30-row gap


def test_signature_state_depends_on_load_as_stated() -> None:
    """Cavitation only at high load (ramp from the onset to the full load), a rope only at
    part load (Gaussian around its load), nothing on other units or outside the period."""
    cavitation = _mine("LBD", "cavitation")[0]
    m = cavitation.magnitude
    mid = pd.DatetimeIndex([cavitation.start + (cavitation.end - cavitation.start) / 2] * 6)
    load = np.array([0.3, 0.65, 0.75, 0.85, 0.95, 0.95])
    online = np.array([True] * 5 + [False])
    state = signature_state("LBD", "U2", mid, load, online)
    assert np.allclose(state.cavitation, [0.0, 0.0, 0.5, 1.0, 1.0, 0.0], rtol=0, atol=1e-12)
    assert np.allclose(state.efficiency_deficit, m["efficiency_deficit_fraction"]
                       * state.cavitation, rtol=0, atol=1e-15)
    assert np.allclose(state.hf_vibration_rise, m["hf_vibration_rise_m_s2"] * state.cavitation)
    assert not signature_state("LBD", "U1", mid, load, online).cavitation.any()
    before = pd.DatetimeIndex([cavitation.start - timedelta(minutes=10)] * 6)
    assert not signature_state("LBD", "U2", before, load, online).cavitation.any()
    rope = _mine("LBD", "vortex_rope")[0]
    r = rope.magnitude
    mid = pd.DatetimeIndex([rope.start + (rope.end - rope.start) / 2] * 3)
    state = signature_state("LBD", "U1", mid, np.array([0.2, 0.47, 0.9]), np.ones(3, bool))
    expected = np.exp(-((np.array([0.2, 0.47, 0.9]) - r["rope_load_fraction"])
                        / r["rope_load_width_fraction"]) ** 2)
    assert np.allclose(state.rope, expected, rtol=0, atol=1e-15)
    assert state.rope[1] == 1.0 and state.rope[2] < 1e-3
    assert np.allclose(state.pulsation_rise_of_head, r["pulsation_rise_of_head"] * expected)


def test_cavitation_episodes_low_tailwater_high_load_hf_and_deficit(year) -> None:
    sim, without = year["LBD"]
    unit = sim.plant.unit("U2")
    tags = _tags(sim)
    site = sim.plant.plant
    hf = sim.clean[tags[("U2", "hf_vibration")]]
    load = _load(sim, "U2")
    state = sim.signatures["U2"]
    anywhere = np.zeros(len(sim.cal.times), dtype=bool)
    rising = []
    for s in _mine("LBD", "cavitation"):
        m = s.magnitude
        ramp = timedelta(seconds=m["drawdown_ramp_s"])
        inside, full = _window(sim, s.start, s.end), _window(sim, s.start + ramp, s.end - ramp)
        anywhere |= inside
        # the tailwater really is lower: by the stated drawdown between the ramps
        drop = without.tailwater - sim.tailwater
        assert np.allclose(drop[full], m["tailwater_drawdown_m"], rtol=0, atol=1e-9)
        assert np.all((drop[inside] >= 0) & (drop[inside] <= m["tailwater_drawdown_m"] + 1e-9))
        # U2 carries the load in its stated band; U1 and U3 stand by (a cap of 0), so no
        # other unit runs at the low sigma
        assert sim.units["U2"].online[inside].all()
        assert np.all((load[inside] >= m["unit_load_min_fraction"] - 1e-9)
                      & (load[inside] <= m["unit_load_max_fraction"] + 1e-9))
        assert m["other_units_load_max_fraction"] == 0.0
        for other in ("U1", "U3"):
            assert not sim.units[other].online[inside].any()
        # plant sigma (Thoma) with U2's net head drops by ~0.1: below the Kaplan critical
        # sigma of ~0.5-0.6 at n_q ~180 (from memory). Without the episode the same hours
        # give a higher sigma even on the larger gross head (a conservative comparison).
        hourly = np.flatnonzero(full)[::SAMPLES_PER_HOUR]
        args = (site.elevation, unit.runner_reference_elevation, 1000.0, sim.units["U2"].g)
        sigma = _thoma_sigma(sim.tailwater[hourly], sim.units["U2"].net_head[hourly],
                             sim.water_temperature[hourly], *args)
        sigma_without = _thoma_sigma(without.tailwater[hourly],
                                     (without.headwater - without.tailwater)[hourly],
                                     without.water_temperature[hourly], *args)
        assert np.all(sigma < 0.56) and np.all(sigma_without > 0.60)
        assert np.median(sigma_without - sigma) > 0.08
        # intensity: the drawdown's share times the load ramp, from the noise-free signals
        ramp_load = np.clip((load - m["onset_load_fraction"])
                            / (m["full_load_fraction"] - m["onset_load_fraction"]), 0, 1)
        intensity = drop / m["tailwater_drawdown_m"] * ramp_load
        assert np.allclose(state.cavitation[inside], intensity[inside], rtol=0, atol=1e-9)
        # HF vibration: the healthy law plus the stated rise times the intensity
        assert np.allclose(hf[inside] - _healthy_hf(sim, "U2")[inside],
                           m["hf_vibration_rise_m_s2"] * intensity[inside], rtol=0, atol=1e-9)
        rising.append(hf[full & (intensity > 0.99)])
    # rising strongly: over 5x the unit's own high-load level outside the episodes
    high_outside = ~anywhere & sim.units["U2"].online & (load >= 0.85)
    assert high_outside.sum() > 500
    assert np.median(np.concatenate(rising)) > 5 * np.median(hf[high_outside])
    # efficiency: the truth loses the stated deficit times the intensity in the episodes and
    # nothing elsewhere (U2 is otherwise healthy)
    op = sim.units["U2"]
    on = op.online
    lost = (op.reference_efficiency - op.turbine_efficiency + op.off_cam_effect)
    deficit = _mine("LBD", "cavitation")[0].magnitude["efficiency_deficit_fraction"]
    assert np.allclose(lost[on], deficit * state.cavitation[on], rtol=0, atol=1e-14)
    assert np.abs(lost[on & ~anywhere]).max() < 1e-14
    assert np.all(state.cavitation[~anywhere] == 0.0)
    # the same from the noise-free exported signals (index efficiency from WK dp, levels,
    # power, opening and blade angle): the Kaplan's mm-size head error (see the drift test)
    # moves a deficit by ~1e-5, so 5e-5 is the bound
    heavy = op.generator_power > 0.5 * unit.rated_power
    _, from_exports = _index_deficit(sim, "U2", measured=False)
    assert np.allclose(from_exports, deficit * state.cavitation[heavy], rtol=0, atol=5e-5)
    # and with sensor noise: medians over ~1,000 samples of the full episode against the
    # unit's high-load samples outside differ by the deficit within 0.05 point (per-sample
    # noise ~0.2 point, invented noise levels)
    _, noisy = _index_deficit(sim, "U2", measured=True)
    heavy = sim.measured[tags[("U2", "active_power")]] > 0.5 * unit.rated_power  # its mask
    full_cavitation = state.cavitation[heavy] > 0.99
    outside = ~anywhere[heavy] & (load[heavy] >= 0.85)
    assert full_cavitation.sum() > 500
    assert np.median(noisy[full_cavitation]) - np.median(noisy[outside]) == pytest.approx(
        deficit, abs=5e-4)
    # no other unit of either plant ever cavitates
    for plant in ("GLF", "LBD"):
        for code, st in year[plant][0].signatures.items():
            if (plant, code) != ("LBD", "U2"):
                assert not st.cavitation.any() and not st.efficiency_deficit.any(), code


def test_vortex_rope_period_part_load_and_draft_tube_pulsation(year) -> None:
    sim, _ = year["LBD"]
    rope = _mine("LBD", "vortex_rope")[0]
    m = rope.magnitude
    inside = _window(sim, rope.start, rope.end)
    load = _load(sim, "U1")
    op = sim.units["U1"]
    assert op.online[inside].all()
    assert np.all((load[inside] >= m["unit_load_min_fraction"] - 1e-9)
                  & (load[inside] <= m["unit_load_max_fraction"] + 1e-9))
    ratio = _pulsation_of_head(sim, "U1")
    # a few % of rho g H peak to peak during the rope (several kPa at ~18.5 m), against
    # well under 1 % for the same unit at the same part load outside the period
    assert np.all((ratio[inside] > 0.03) & (ratio[inside] < 0.05))
    kpa = sim.clean[_tags(sim)[("U1", "draft_tube_pulsation")]][inside] / 1e3
    assert 5.0 < np.median(kpa) < 9.0
    like_load = ~inside & op.online & (load >= 0.42) & (load <= 0.53)
    assert like_load.sum() > 200
    assert np.nanmax(ratio[like_load]) < 0.006
    assert np.nanmin(ratio[inside]) > 5 * np.nanmax(ratio[like_load])
    expected = (m["pulsation_rise_of_head"] * np.exp(
        -((load - m["rope_load_fraction"]) / m["rope_load_width_fraction"]) ** 2))
    assert np.allclose(sim.signatures["U1"].pulsation_rise_of_head[inside], expected[inside],
                       rtol=0, atol=1e-15)
    # the rope is the only change: efficiency and HF vibration follow the healthy unit
    lost = (op.reference_efficiency - op.turbine_efficiency + op.off_cam_effect)[op.online]
    assert np.abs(lost).max() < 1e-14
    assert np.allclose(sim.clean[_tags(sim)[("U1", "hf_vibration")]], _healthy_hf(sim, "U1"),
                       rtol=0, atol=1e-12)
    # every other draft tube, and U1 outside its period, stays below 1 % of rho g H
    for plant in ("GLF", "LBD"):
        s = year[plant][0]
        for code, unit in ((u.code, u) for u in s.plant.units):
            if unit.runner_type == "pelton":
                assert (code, "draft_tube_pulsation") not in _tags(s)
                continue
            r = _pulsation_of_head(s, code)
            quiet = ~inside if (plant, code) == ("LBD", "U1") else np.ones(r.size, bool)
            assert np.nanmax(r[quiet]) < 0.01, (plant, code)


def test_bearing_fault_raises_the_guide_bearing_over_cooling_water(year) -> None:
    sim, without = year["GLF"]
    fault = _mine("GLF", "bearing")[0]
    m = fault.magnitude
    tags = _tags(sim)

    def rise(s, code):  # guide-bearing metal over cooling water inlet [K]
        return (s.clean[tags[(code, "guide_bearing_temperature")]]
                - s.clean[tags[(code, "cooling_water_temperature")]])

    excess = rise(sim, "MG4") - rise(without, "MG4")
    settled = _window(sim, fault.start + timedelta(seconds=m["ramp_s"]) + LAG_MARGIN,
                      fault.end)
    # the rise over the 2 K standstill offset grows by the stated factor once the ramp and
    # the bearing lag have settled (the lag is linear, so the factor passes through it)
    assert np.allclose(excess[settled], m["rise_factor"] * (rise(without, "MG4") - 2.0)[settled],
                       rtol=0, atol=1e-6)
    # several K while running at like load, against the unit's twin MG3 (same design)
    on4, on3 = (_settled_online(sim, code) for code in ("MG4", "MG3"))
    like = on4 & on3 & (np.abs(_load(sim, "MG4") - _load(sim, "MG3")) < 0.01)
    twin = rise(sim, "MG4") - rise(sim, "MG3")
    assert (settled & like).sum() > 200
    assert np.all(twin[settled & like] > 5.0) and np.median(twin[settled & like]) < 9.0
    clean = ~_window(sim, fault.start, fault.end + LAG_MARGIN)
    assert (clean & like).sum() > 1000
    assert np.abs(twin[clean & like]).max() < 0.5
    # halfway through the ramp the factor is half its full value
    half = _window(sim, fault.start + timedelta(seconds=m["ramp_s"] / 2),
                   fault.start + timedelta(seconds=m["ramp_s"] / 2, minutes=10))
    assert sim.signatures["MG4"].bearing_rise_factor[half] == pytest.approx(
        [m["rise_factor"] / 2], abs=1e-12)
    # gone once the cleaned cooler is in; the thrust bearing never changes
    assert np.abs(excess[clean]).max() < 1e-9
    thrust = tags[("MG4", "thrust_bearing_temperature")]
    assert np.array_equal(sim.clean[thrust], without.clean[thrust])


def _settled_online(sim, code: str, hours: float = 6.0) -> np.ndarray:
    """True where ``code`` has been online for at least the last ``hours`` (settled
    bearing temperatures: 6 h is 8 of their 45-minute time constants)."""
    on = sim.units[code].online.astype(int)
    n = int(hours * SAMPLES_PER_HOUR)
    window = np.convolve(on, np.ones(n, dtype=int), mode="full")[: on.size]
    return window == n


def test_signatures_are_absent_outside_their_periods(year) -> None:
    """Outside its episodes (and a day after each, for the bearing lag) every noise-free
    signal of the year equals the same year simulated without signatures; the healthy
    units (GLF MG1 and MG3 among them) equal it everywhere."""
    for plant in ("GLF", "LBD"):
        sim, without = year[plant]
        touched = np.zeros(len(sim.cal.times), dtype=bool)
        for s in _mine(plant):
            touched |= _window(sim, s.start, s.end + LAG_MARGIN)
        baseline = np.asarray(sim.cal.times < pd.Timestamp(DEFAULT_START) + BASELINE)
        assert not touched[baseline].any()  # the first 8 weeks are clean
        signed = {s.unit for s in _mine(plant)}
        for tag, mapping in sim.plant.tags.items():
            a, b = sim.clean[tag], without.clean[tag]
            # exactly equal, but for the tail of a bearing lag (a first-order filter decays
            # without ever reaching zero: e^-32 of a few K after a day)
            same = np.array_equal if "temperature" not in mapping.signal else (
                lambda x, y: np.allclose(x, y, rtol=0, atol=1e-9))
            assert same(a[~touched], b[~touched]), tag
            # and the measured values too: the noise streams do not depend on the episodes
            assert same(sim.measured[tag][~touched], without.measured[tag][~touched]), tag
            if plant == "GLF" and mapping.unit not in signed:
                # Glimmerfels holds no unit's load: its healthy units never change at all
                assert np.array_equal(a, b), tag
        for code, state in sim.signatures.items():
            for name in ("cavitation", "rope", "bearing_rise_factor"):
                assert not getattr(state, name)[~touched].any(), (code, name)
            if code not in signed:
                assert not any(getattr(state, f).any() for f in (
                    "cavitation", "efficiency_deficit", "hf_vibration_rise", "rope",
                    "pulsation_rise_of_head", "bearing_rise_factor")), code
            # HF vibration follows the healthy law wherever the unit has no cavitation
            hf = sim.clean[_tags(sim)[(code, "hf_vibration")]]
            calm = state.cavitation == 0
            assert np.allclose(hf[calm], _healthy_hf(sim, code)[calm], rtol=0, atol=1e-12)
    # the drift truth is untouched: U3 and MG2 lose exactly their conditions' efficiency
    for plant, code in (("LBD", "U3"), ("GLF", "MG2")):
        sim, without = year[plant]
        assert np.array_equal(sim.units[code].degradation, without.units[code].degradation)


def test_a_demo_over_the_rope_start_shows_it_in_the_exports(tmp_path: Path) -> None:
    """Four days from 2026-03-08: the rope is in span, the export shows U1's pulsation jump
    at the stated hour, and the same arguments still give byte-identical files."""
    start = datetime(2026, 3, 8, tzinfo=UTC)
    first = generate_demo(tmp_path / "a", days=4, start=start)
    second = generate_demo(tmp_path / "b", days=4, start=start)
    a, b = _files(first.root), _files(second.root)
    assert a.keys() == b.keys() and all(a[k] == b[k] for k in a)
    truth = json.loads(first.truth_file.read_text())
    assert [s["signature"] for s in truth["signatures"] if s["in_span"]] == ["vortex_rope"]
    plant = load_plant_file(first.root / "plants" / "lbd.toml")
    frames = [c.frame for p in first.export_files if "lantern" in p.name
              for c in iter_canonical_chunks(p, plant, FileReport(p.name))]
    df = pd.concat(frames)
    u1 = df[df["unit"] == "U1"].set_index("ts")  # the plant's levels come with each unit
    gross = u1["headwater_level"] - u1["tailwater_level"]
    g = float(local_gravity(plant.plant.latitude, plant.plant.elevation))
    # over rho g H_gross with rho ~1000 kg/m3 (cold water, within 0.1 %) and the gross head
    # (net head is ~2 % lower): a lower bound of the ratio to net head
    ratio = u1["draft_tube_pulsation"] / (1000.0 * g * gross)
    online = u1["active_power"] > 0
    rope_start = pd.Timestamp(truth["signatures"][0]["start"])
    before = ratio[online & (u1.index < rope_start)]
    during = ratio[u1.index >= rope_start]
    assert before.size > 100 and during.size > 100
    assert before.max() < 0.01
    # 4 % x the load Gaussian (>= 0.85 at 42-53 % load) less 5 % sensor noise, 2 % head
    assert during.min() > 0.025
    # held at 42-53 % of its 30 MW (0.1 % power noise); the NaNs are the bad-timestamp
    # fault's rejected power cells (truth.json)
    held = u1.loc[u1.index >= rope_start, "active_power"] / 30e6
    rejected = [t for f in truth["faults"] if f["kind"] == "bad_timestamp"
                for t in f["times_utc"] if pd.Timestamp(t) >= rope_start]
    assert held.isna().sum() == len(rejected) == 2
    assert held.dropna().between(0.415, 0.535).all()
