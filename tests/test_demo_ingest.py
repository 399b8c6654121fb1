"""The demo fleet through the real ingestion path: it loads, and loading it again is a no-op."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sqlalchemy import Engine, func, select

from hydrodrift.demofleet import generate_demo
from hydrodrift.settings import Settings
from ingest.pipeline import ingest_file
from ingest.registry import import_plant_file
from store.engine import session_scope
from store.models import IngestedFile, Sample


@pytest.fixture(scope="module")
def demo_root(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("demo")
    generate_demo(root, days=10)
    return root


def _count(engine: Engine) -> int:
    with session_scope(engine) as session:
        return session.scalar(select(func.count()).select_from(Sample))


def test_demo_exports_load_and_reloading_changes_nothing(engine: Engine, demo_root: Path,
                                                         tmp_path: Path) -> None:
    manifest_plants = sorted((demo_root / "plants").glob("*.toml"))
    exports = sorted((demo_root / "exports").rglob("*.csv"))
    assert manifest_plants and exports
    for plant in manifest_plants:
        import_plant_file(engine, plant)
    settings = Settings(_env_file=None, data_dir=tmp_path / "data")
    outcomes = [ingest_file(engine, path, settings=settings) for path in exports]
    assert all(o.status == "loaded" for o in outcomes), [(o.path.name, o.message)
                                                          for o in outcomes]
    stored = _count(engine)
    assert stored == sum(o.rows_new for o in outcomes) > 0
    truth = json.loads((demo_root / "truth.json").read_text())
    assert truth  # the scenario's ground truth is written beside the exports

    again = [ingest_file(engine, path, settings=settings) for path in exports]
    assert {o.status for o in again} == {"already"}
    assert _count(engine) == stored
    with session_scope(engine) as session:
        assert session.scalar(select(func.count()).select_from(IngestedFile)) == len(exports)
