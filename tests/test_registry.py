"""Plant import: create, unchanged re-import, append-only versions (SQLite and PostgreSQL)."""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import Engine, func, select

from ingest.plant_file import PlantFileError
from ingest.registry import BEGINNING, import_plant_file, stored_plant_file, unit_config_at
from store.engine import session_scope
from store.models import Plant, PlantConfigVersion, Unit, UnitConfigVersion
from tests.conftest import TEST_DATA

PLANT = TEST_DATA / "plants" / "test_wide.toml"


def _count(engine: Engine, model: type) -> int:
    with session_scope(engine) as session:
        return session.scalar(select(func.count()).select_from(model))


def test_first_import_creates_plant_units_and_versions(engine: Engine) -> None:
    result = import_plant_file(engine, PLANT)
    assert result.plant_created and result.changed
    assert result.unit_versions == {"U1": 1, "U2": 1}
    with session_scope(engine) as session:
        plant = session.scalar(select(Plant).where(Plant.code == "TW"))
        assert plant is not None and plant.timezone == "Europe/Zurich"
        assert [u.code for u in plant.units] == ["U1", "U2"]
        version = session.scalar(select(UnitConfigVersion))
        assert version is not None and version.effective_from == BEGINNING
        plant_file, plant_version = stored_plant_file(session, plant)
        assert plant_version == 1
        assert plant_file.unit("U1").rated_power == pytest.approx(60e6)
        assert set(plant_file.tags) == {"P1", "DP1", "GV1", "P2", "DP2", "GV2", "HW", "TW",
                                        "TWAT"}


def test_reimport_of_the_same_content_changes_nothing(engine: Engine) -> None:
    import_plant_file(engine, PLANT)
    again = import_plant_file(engine, PLANT)
    assert not again.changed
    assert _count(engine, UnitConfigVersion) == 2
    assert _count(engine, PlantConfigVersion) == 1


def test_changed_unit_adds_a_version_and_keeps_the_old(engine: Engine, tmp_path: Path) -> None:
    import_plant_file(engine, PLANT)
    changed = tmp_path / "p.toml"
    changed.write_text(PLANT.read_text().replace(
        'code = "U1"\nrunner_type = "francis"\nrated_power = "60 MW"',
        'code = "U1"\nrunner_type = "francis"\neffective_from = 2025-06-01T00:00:00Z\n'
        'rated_power = "62 MW"'))
    result = import_plant_file(engine, changed)
    assert result.units_changed == ["U1"] and result.unit_versions == {"U1": 2, "U2": 1}
    assert not result.plant_changed
    with session_scope(engine) as session:
        unit = session.scalar(select(Unit).where(Unit.code == "U1"))
        versions = session.scalars(select(UnitConfigVersion).where(
            UnitConfigVersion.unit_id == unit.id).order_by(UnitConfigVersion.version)).all()
        assert [v.config["rated_power"] for v in versions] == [60e6, 62e6]
        from datetime import UTC, datetime

        before = unit_config_at(session, unit, datetime(2025, 5, 31, tzinfo=UTC))
        after = unit_config_at(session, unit, datetime(2025, 6, 2, tzinfo=UTC))
        assert before is not None and before.version == 1
        assert after is not None and after.version == 2


def test_tag_map_change_adds_a_plant_version(engine: Engine, tmp_path: Path) -> None:
    import_plant_file(engine, PLANT)
    changed = tmp_path / "p.toml"
    changed.write_text(PLANT.read_text().replace('HW = { unit = "*", signal = "headwater_level",'
                                                 ' uom = "m" }',
                                                 'HW = { unit = "*", signal = "headwater_level",'
                                                 ' uom = "ft" }'))
    result = import_plant_file(engine, changed)
    assert result.plant_changed and result.plant_version == 2
    assert _count(engine, PlantConfigVersion) == 2


def test_runner_type_change_is_refused_and_nothing_is_written(engine: Engine,
                                                              tmp_path: Path) -> None:
    import_plant_file(engine, PLANT)
    changed = tmp_path / "p.toml"
    changed.write_text(PLANT.read_text().replace('code = "U2"\nrunner_type = "francis"',
                                                 'code = "U2"\nrunner_type = "kaplan"'))
    with pytest.raises(PlantFileError, match="give the new machine a new code"):
        import_plant_file(engine, changed)
    assert _count(engine, UnitConfigVersion) == 2
