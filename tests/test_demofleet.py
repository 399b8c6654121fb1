"""The demo fleet generator: determinism, valid plant files, DST, physics, ground truth.

The fleet is fictional; these tests check that its files say what truth.json says, and
that its physics holds together. Tolerances are explained beside each check.
"""

from __future__ import annotations

import csv
import json
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from hydrodrift.demofleet import generate_demo, simulate_fleet
from hydrodrift.demofleet.dispatch import SAMPLES_PER_HOUR
from hydrodrift.demofleet.efficiency import generator_efficiency, turbine_efficiency
from hydrodrift.demofleet.hydraulics import GRAVITY, RHO_WATER
from hydrodrift.demofleet.scenario import FAULTS
from ingest.plant_file import PeltonGeometry, load_plant_file

DAYS = 14


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory):
    return generate_demo(tmp_path_factory.mktemp("demo"), days=DAYS)


@pytest.fixture(scope="module")
def truth(demo) -> dict:
    return json.loads(demo.truth_file.read_text())


@pytest.fixture(scope="module")
def plants(demo) -> dict:
    return {p.plant.code: p for p in map(load_plant_file, demo.plant_files)}


def _files(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes()
            for p in sorted(root.rglob("*")) if p.is_file()}


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
    # every 10-minute sample: 4 units' wide rows less the 30-row gap, 38 long tags per sample
    samples = DAYS * 24 * SAMPLES_PER_HOUR
    assert demo.rows_written == (samples - 30) + samples * 38


def test_short_spans_are_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="days must be at least"):
        generate_demo(tmp_path, days=2)
    with pytest.raises(ValueError, match="timezone-aware"):
        generate_demo(tmp_path, days=5, start=datetime(2026, 1, 1))


# --------------------------------------------------------------------------- plant files
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
            # synchronous speed: n = 60 f / p with a whole number of pole pairs
            assert pole_pairs == pytest.approx(round(pole_pairs), abs=1e-9)
            assert 8 <= len(unit.reference_points) <= 15
            q = unit.rated_flow
            if isinstance(unit.geometry, PeltonGeometry):
                q /= unit.geometry.jet_count
            n_q = rpm * q**0.5 / unit.rated_head**0.75
            # specific speed ranges per runner type (textbook ranges, from memory)
            low, high = {"pelton": (5, 25), "francis": (20, 120), "kaplan": (100, 300)}[
                unit.runner_type]
            assert low <= n_q <= high, (unit.code, n_q)
            # penstock loss a few % of the head at rated flow (common practice)
            loss = unit.penstock_loss_coefficient * unit.rated_flow**2 / unit.rated_head
            assert 0.01 <= loss <= 0.05, (unit.code, loss)
            eta_gen = generator_efficiency(unit, np.array([0.5, 1.0]) * unit.rated_power)
            assert np.all((eta_gen >= 0.96) & (eta_gen <= 0.985))  # brief's range
    # reaction runners below tailwater (cavitation), Pelton jets above it
    tail_glf = 1478.0
    assert all(u.runner_reference_elevation < tail_glf for u in glf.units
               if u.runner_type == "francis")
    assert all(u.runner_reference_elevation > tail_glf + 1 for u in glf.units
               if u.runner_type == "pelton")


def test_efficiency_model_reproduces_the_reference_points(plants) -> None:
    for plant in plants.values():
        for unit in plant.units:
            points = unit.reference_points
            eta = turbine_efficiency(unit, [p.power for p in points], [p.head for p in points])
            # the points were printed to 4 decimals of efficiency and 4 of MW: 2e-4 covers it
            assert np.max(np.abs(eta - [p.efficiency for p in points])) < 2e-4
            # and the flow printed with them closes the energy balance P = rho g Q H eta
            for p in points:
                assert p.power == pytest.approx(RHO_WATER * GRAVITY * p.flow * p.head
                                                * p.efficiency, rel=2e-3)


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
def test_energy_balance_holds_at_the_noise_free_level(plants) -> None:
    sims = simulate_fleet(list(plants.values()), days=DAYS)
    for sim in sims:
        for code, op in sim.units.items():
            unit = sim.plant.unit(code)
            on = op.online
            assert on.sum() > 100, code  # every unit ran in the fortnight
            rebuilt = (RHO_WATER * GRAVITY * op.flow * op.net_head * op.turbine_efficiency
                       * op.generator_efficiency)
            # closed by construction: only float round-off (1e-12 relative) may remain
            assert np.allclose(rebuilt[on], op.generator_power[on], rtol=1e-12, atol=0)
            # net head = gross - k_p Q^2, converged to 1e-9 m in the iteration
            assert np.allclose(op.net_head, op.gross_head - unit.penstock_loss_coefficient
                               * op.flow**2, rtol=0, atol=1e-8)
            assert np.all(op.flow[~on] == 0)


def test_flow_meter_in_the_export_closes_the_energy_balance(demo, plants) -> None:
    unit = plants["GLF"].unit("MG1")
    frames = [pd.read_csv(p, sep=";", decimal=",", skiprows=1)
              for p in demo.export_files if "glimmerfels" in p.name]
    df = pd.concat(frames).apply(pd.to_numeric, errors="coerce").replace(-9999, np.nan)
    power = df["GLF/MG1/P"] * 1e6
    flow = df["GLF/MG1/Q"]
    head = df["GLF/OW/H"] - df["GLF/UW/H"] - unit.penstock_loss_coefficient * flow**2
    ok = (power > 0.5 * unit.rated_power) & flow.notna() & head.notna()  # faults are NaN
    p_turb = power / generator_efficiency(unit, power)
    eta_i = p_turb / (RHO_WATER * GRAVITY * flow * head)
    eta_ref = turbine_efficiency(unit, p_turb, head)
    deviation = (eta_i - eta_ref)[ok]
    assert ok.sum() > 500
    # MG1 is healthy: with 0.1 % power and 0.3 % flow noise per sample the median of the
    # relative deviation over >500 samples is well inside 0.1 point (invented noise levels)
    assert abs(np.median(deviation)) < 1e-3
    assert deviation.std() < 0.01


def _index_deficit(sim, code: str, measured: bool) -> tuple[np.ndarray, np.ndarray]:
    """Years since start and (reference - index efficiency) from WK dp, online samples."""
    unit = sim.plant.unit(code)
    signals = sim.measured if measured else sim.clean
    tag = {m.signal: t for t, m in sim.plant.tags.items() if m.unit == code}
    level = {m.signal: t for t, m in sim.plant.tags.items() if m.unit == "*"}
    power = signals[tag["active_power"]]
    on = power > 0.5 * unit.rated_power
    dp = np.clip(signals[tag["wk_differential_pressure"]], 0, None)
    flow = unit.winter_kennedy_coefficient * dp**unit.winter_kennedy_exponent
    gross = signals[level["headwater_level"]] - signals[level["tailwater_level"]]
    head = gross - unit.penstock_loss_coefficient * flow**2
    p_turb = power / generator_efficiency(unit, power)
    with np.errstate(divide="ignore", invalid="ignore"):
        eta_i = p_turb / (RHO_WATER * GRAVITY * flow * head)
    deficit = turbine_efficiency(unit, p_turb, head) - eta_i
    years = sim.cal.seconds / (365.25 * 86400)
    return years[on], deficit[on]


def test_degrading_unit_loses_1_5_points_per_year(plants) -> None:
    lbd = simulate_fleet(list(plants.values()), days=90)[1]
    years, deficit = _index_deficit(lbd, "U3", measured=False)
    slope, intercept = np.polyfit(years, deficit * 100, 1)
    # noise-free WK dp: the planted 1.5 points per year comes back to round-off
    assert slope == pytest.approx(1.5, abs=1e-6)
    assert intercept == pytest.approx(0.0, abs=1e-6)
    years, deficit = _index_deficit(lbd, "U3", measured=True)
    slope_noisy = np.polyfit(years, deficit * 100, 1)[0]
    # with sensor noise over 90 days: the slope's standard error is ~0.05 pt/yr here,
    # so 0.3 pt/yr is a 6-sigma band (estimated for the invented noise levels)
    assert slope_noisy == pytest.approx(1.5, abs=0.3)
    years, deficit = _index_deficit(lbd, "U1", measured=True)
    assert np.polyfit(years, deficit * 100, 1)[0] == pytest.approx(0.0, abs=0.3)


def test_step_unit_loses_2_points_on_its_date(plants) -> None:
    start = datetime(2026, 5, 25, tzinfo=UTC)
    glf = simulate_fleet(list(plants.values()), days=14, start=start)[0]
    years, deficit = _index_deficit(glf, "MG2", measured=False)
    step = datetime(2026, 6, 1, 10, tzinfo=UTC)  # scenario.CONDITIONS, stated date
    step_years = (step - start).total_seconds() / (365.25 * 86400)
    before, after = deficit[years < step_years], deficit[years >= step_years]
    assert before.size > 50 and after.size > 50
    assert np.allclose(before, 0.0, atol=1e-9)
    assert np.allclose(after, 0.02, atol=1e-9)


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
    assert truth["signatures"] == []
    for fault in truth["faults"]:
        kind = fault["kind"]
        if fault["plant"] == "LBD" and kind != "bad_timestamp":
            text = _lines(root, fault["file"])
            for line, block in zip(fault["lines"], fault["timestamp_block_lines"], strict=True):
                # the block starts with the first tag, at the faulty row's time
                assert text[block - 1].split(",")[1] == "LBD.FB.ELEV.FT"
                assert text[block - 1].split(",")[0] == text[line - 1].split(",")[0]
                assert block <= line < block + 38
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
