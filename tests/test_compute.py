"""``hydrodrift compute`` and ``report`` on the demo fleet: incremental, idempotent, versioned.

Runs on SQLite and PostgreSQL. The demo here is short (six weeks) with a one-week baseline,
so that the index constant is fixed within the span; the year-long recovery of the demo's
injected faults is in test_recovery.py.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from sqlalchemy import Engine, func, select

from hydrodrift import __version__
from hydrodrift.demofleet import generate_demo
from hydrodrift.settings import Settings
from ingest.pipeline import ingest_file
from ingest.registry import import_plant_file
from jobs.compute import compute, pending_files
from jobs.report import ReportError, latest_complete_week, render_report, weekly_report
from store.engine import session_scope
from store.models import EfficiencyWindow, ReferenceModel, WeeklyDrift

DAYS = 42


@pytest.fixture(scope="module")
def demo_root(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("demo_compute")
    generate_demo(root, days=DAYS)
    return root


def _settings(tmp_path: Path) -> Settings:
    return Settings(_env_file=None, data_dir=tmp_path / "data", baseline_days=7.0,
                    baseline_min_hours=10.0, bootstrap_resamples=200)


def _load(engine: Engine, root: Path, settings: Settings, exports: list[Path]) -> None:
    for plant in sorted((root / "plants").glob("*.toml")):
        import_plant_file(engine, plant)
    for path in exports:
        outcome = ingest_file(engine, path, settings=settings)
        assert outcome.status in ("loaded", "already"), outcome.message


def _exports(root: Path) -> list[Path]:
    return sorted((root / "exports").rglob("*.csv"))


def _snapshot(engine: Engine) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Windows and weekly rows without their bookkeeping columns, sorted."""
    with session_scope(engine) as session:
        windows = pd.read_sql(select(EfficiencyWindow), session.connection())
        weeks = pd.read_sql(select(WeeklyDrift), session.connection())
    windows = windows.sort_values(["unit_id", "start"]).reset_index(drop=True)
    weeks = weeks.drop(columns=["computed_at"]).sort_values(["unit_id", "week"])
    return windows, weeks.reset_index(drop=True)


def test_compute_builds_references_windows_and_weeks(engine: Engine, demo_root: Path,
                                                     tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    _load(engine, demo_root, settings, _exports(demo_root))
    summary = compute(engine, settings)
    assert summary.problems == []
    assert len(summary.references_created) == 7
    # every unit but the one with a flow meter (GLF MG1, absolute) gets its index constant
    assert sorted(summary.constants_set) == ["GLF/MG2", "GLF/MG3", "GLF/MG4", "LBD/U1",
                                             "LBD/U2", "LBD/U3"]
    with session_scope(engine) as session:
        refs = list(session.scalars(select(ReferenceModel)))
        assert {r.flow_basis for r in refs} == {"flow_meter", "winter_kennedy"}
        for ref in refs:
            assert ref.index_constant is not None
            # demo WK coefficients are the true ones: the constant is ~1 (a few tenths of %)
            assert abs(ref.index_constant - 1.0) < 0.01
            assert ref.calibration["rms_efficiency"] < 0.002  # < 0.2 points
            assert ref.code_version == __version__
            assert 0.85 < ref.best_efficiency_point["efficiency"] < 0.96
        steady = session.scalar(select(func.count()).select_from(EfficiencyWindow)
                                .where(EfficiencyWindow.steady.is_(True)))
        with_dev = session.scalar(select(func.count()).select_from(EfficiencyWindow)
                                  .where(EfficiencyWindow.deviation.is_not(None)))
        assert steady > 1000
        assert with_dev > 0.95 * steady  # a few steady windows fall outside the chart at most
        assert pending_files(session) == []
        assert session.scalar(select(func.count()).select_from(WeeklyDrift)) >= 7 * 6


def test_second_compute_changes_nothing(engine: Engine, demo_root: Path,
                                        tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    _load(engine, demo_root, settings, _exports(demo_root))
    compute(engine, settings)
    before = _snapshot(engine)
    again = compute(engine, settings)
    assert again.files == 0 and again.windows == 0 and again.weeks == 0
    assert again.line() == "compute: nothing new to compute"
    after = _snapshot(engine)
    pd.testing.assert_frame_equal(before[0], after[0])
    pd.testing.assert_frame_equal(before[1], after[1])


def test_file_by_file_equals_all_at_once(engine: Engine, demo_root: Path,
                                         tmp_path: Path) -> None:
    """Computing after every monthly file gives the same results as computing once."""
    settings = _settings(tmp_path)
    exports = _exports(demo_root)
    for plant in sorted((demo_root / "plants").glob("*.toml")):
        import_plant_file(engine, plant)
    by_month = sorted(exports, key=lambda p: p.stem.rsplit("_", 1)[-1])
    for path in by_month:
        assert ingest_file(engine, path, settings=settings).status == "loaded"
        compute(engine, settings)
    windows_inc, weeks_inc = _snapshot(engine)

    other = tmp_path / "other.sqlite3"
    from store.engine import make_engine
    from store.migrate import upgrade

    fresh = make_engine(f"sqlite:///{other}")
    upgrade(fresh)
    _load(fresh, demo_root, settings, exports)
    compute(fresh, settings)
    windows_all, weeks_all = _snapshot(fresh)
    fresh.dispose()
    value_cols = ["steady", "n_samples", "energy_j", "eta_index_raw", "eta_index",
                  "eta_reference", "deviation"]
    pd.testing.assert_frame_equal(windows_inc[["unit_id", "start", *value_cols]],
                                  windows_all[["unit_id", "start", *value_cols]],
                                  check_exact=False, rtol=1e-9, atol=1e-12)
    week_cols = ["unit_id", "week", "n_windows", "steady_hours", "deviation_median",
                 "deviation_low", "deviation_high", "trend_points_per_year",
                 "change_point_week", "lost_mwh", "cumulative_lost_mwh"]
    pd.testing.assert_frame_equal(weeks_inc[week_cols], weeks_all[week_cols],
                                  check_exact=False, rtol=1e-9, atol=1e-12)


def test_report_formats_and_order(engine: Engine, demo_root: Path, tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    _load(engine, demo_root, settings, _exports(demo_root))
    compute(engine, settings)
    with session_scope(engine) as session:
        latest = latest_complete_week(session)
        # 42 days from Monday 2025-12-01 end on Sunday 2026-01-11 (UTC): in Zurich the last
        # hour of that Sunday is past the span, so the latest complete week is 2026-W01
        assert latest in ("2026-W01", "2026-W02")
        week, frame = weekly_report(session)
        assert week == latest
        assert len(frame) == 7
        lost = frame["lost_mwh"].to_numpy()
        finite = lost[~pd.isna(lost)]
        assert list(finite) == sorted(finite, reverse=True)
        with pytest.raises(ReportError, match="expected an ISO week"):
            weekly_report(session, "2026-23")
        with pytest.raises(ReportError, match="no weekly drift computed for 2030-W01"):
            weekly_report(session, "2030-W01")
    text = render_report(week, frame, "csv", caution="CAUTION")
    assert text.splitlines()[0].startswith("plant,unit,runner,week,steady_hours")
    assert text.rstrip().endswith("# CAUTION")
    data = json.loads(render_report(week, frame, "json", caution="CAUTION"))
    assert data["week"] == week and len(data["rows"]) == 7 and data["caution"] == "CAUTION"
    assert data["units"]["deviation_pt"] == "points"


@pytest.mark.parametrize("engine", ["sqlite"], indirect=True)  # the CLI is dialect-blind;
def test_cli_compute_and_report(engine: Engine, engine_env: dict[str, str], demo_root: Path,
                                tmp_path: Path) -> None:  # both dialects run compute above
    settings = _settings(tmp_path)
    _load(engine, demo_root, settings, _exports(demo_root))
    env = dict(engine_env, HYDRODRIFT_BASELINE_DAYS="7", HYDRODRIFT_BASELINE_MIN_HOURS="10",
               HYDRODRIFT_BOOTSTRAP_RESAMPLES="200")
    run = [sys.executable, "-m", "hydrodrift.cli"]
    done = subprocess.run([*run, "compute"], env=env, capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    assert "7 unit(s)" in done.stdout and "new references" in done.stdout
    again = subprocess.run([*run, "compute"], env=env, capture_output=True, text=True,
                           timeout=300)
    assert "nothing new to compute" in again.stdout
    table = subprocess.run([*run, "report"], env=env, capture_output=True, text=True,
                           timeout=300)
    assert table.returncode == 0, table.stderr
    assert "sorted by lost energy" in table.stdout and "never commands a unit" in table.stdout
    csv = subprocess.run([*run, "report", "--format", "csv"], env=env, capture_output=True,
                         text=True, timeout=300)
    assert csv.returncode == 0 and csv.stdout.count("\n") == 1 + 7 + 1
    bad = subprocess.run([*run, "report", "--week", "2026-W99"], env=env,
                         capture_output=True, text=True, timeout=300)
    assert bad.returncode == 1 and "expected an ISO week" in bad.stderr


def test_unit_without_geometry_is_refused_and_its_files_stay_pending(
        engine: Engine, demo_root: Path, tmp_path: Path) -> None:
    settings = _settings(tmp_path)
    plant_text = (demo_root / "plants" / "glf.toml").read_text()
    broken = tmp_path / "glf.toml"
    # drop MG1's reference points: the calibration has nothing to fit
    head, _, rest = plant_text.partition('code = "MG1"')
    start = rest.index("reference_points = [")
    end = rest.index("]\n", rest.index("\n]", start)) + 2
    broken.write_text(head + 'code = "MG1"' + rest[:start] + rest[end:])
    import_plant_file(engine, broken)
    glf = [p for p in _exports(demo_root) if p.parent.name == "GLF"]
    for path in glf:
        assert ingest_file(engine, path, settings=settings).status == "loaded"
    summary = compute(engine, settings)
    assert any("MG1" in p and "reference_points" in p for p in summary.problems)
    assert summary.files == 0
    with session_scope(engine) as session:
        assert len(pending_files(session)) == len(glf)


def test_drift_figure_is_drawn(engine: Engine, demo_root: Path, tmp_path: Path) -> None:
    from hydrodrift.plots import PlotError, unit_drift_figure

    settings = _settings(tmp_path)
    _load(engine, demo_root, settings, _exports(demo_root))
    compute(engine, settings)
    with session_scope(engine) as session:
        png = unit_drift_figure(session, "LBD", "U3", tmp_path / "u3.png")
        pdf = unit_drift_figure(session, "GLF", "MG3", tmp_path / "mg3.pdf")
        with pytest.raises(PlotError, match="no unit GLF/MG9"):
            unit_drift_figure(session, "GLF", "MG9", tmp_path / "x.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 20_000
    assert pdf.read_bytes()[:5] == b"%PDF-"
