"""The bad-input corpus through the whole ingestion path: clear errors, exact rows stored.

Expectations come from ``tests/data/bad/expected.json`` (see its README); this test adds
the store side: after each file the store holds exactly ``rows_loaded`` samples, a fatal
file is quarantined with nothing loaded, a marker is skipped, and the file's record and
report name the lines and columns.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sqlalchemy import Engine, func, select

from hydrodrift.settings import Settings
from ingest.pipeline import ingest_file
from ingest.registry import import_plant_file
from store.engine import session_scope
from store.models import IngestedFile, QuarantinedFile, Sample

BAD = Path(__file__).resolve().parent / "data" / "bad"
EXPECTED = json.loads((BAD / "expected.json").read_text(encoding="utf-8"))["files"]
DATA_FILES = sorted(name for name, e in EXPECTED.items() if not e.get("plant_error"))


@pytest.mark.parametrize("name", DATA_FILES)
def test_corpus_file_in_the_store(name: str, engine: Engine, tmp_path: Path) -> None:
    expected = EXPECTED[name]
    settings = Settings(_env_file=None, data_dir=tmp_path / "data")
    plant = expected.get("plant", "plant_badtest.toml")
    import_plant_file(engine, BAD / plant)
    outcome = ingest_file(engine, BAD / name, settings=settings)
    with session_scope(engine) as session:
        stored = session.scalar(select(func.count()).select_from(Sample))
        record = session.scalar(select(IngestedFile))
        quarantined = session.scalar(select(func.count()).select_from(QuarantinedFile))

    if expected.get("marker"):
        assert outcome.status == "skipped" and "completion marker" in outcome.message
        assert stored == 0 and record is None
        return
    if expected["fatal"]:
        assert outcome.status == "quarantined", outcome
        assert stored == 0 and quarantined == 1
        first = expected["problems"][0]
        assert all(text in outcome.message for text in first.get("mentions", ())), outcome
        kinds = {p["kind"] for p in record.report["problems"]}
        assert first["kind"] in kinds or name == "empty.csv"
        if first.get("line") is not None:
            assert any(p.get("line") == first["line"] for p in record.report["problems"])
        return

    assert outcome.status in ("loaded", "empty"), outcome
    assert stored == expected["rows_loaded"]
    assert outcome.rows_rejected == expected["rows_rejected"] == record.rows_rejected
    assert record.status == ("loaded" if expected["rows_loaded"] else "empty")
    for want in expected["problems"]:
        assert any(p["kind"] == want["kind"] and p["line"] == want["line"]
                   and p["column"] == want["column"] for p in record.report["problems"]), want
    for line in outcome.problems:
        assert line.startswith(name), line  # every message names the file

    again = ingest_file(engine, BAD / name, settings=settings)
    assert again.status == "already"
    with session_scope(engine) as session:
        assert session.scalar(select(func.count()).select_from(Sample)) == stored
