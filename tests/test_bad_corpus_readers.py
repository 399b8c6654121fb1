"""Every file of the bad-input corpus (tests/data/bad) through the readers.

The expected outcome of each file is written down in ``tests/data/bad/expected.json``
(hand-derived from the file contents; see ``tests/data/bad/README.md``). Besides the
outcome, each test checks that the messages say where: every report line starts with
the file name, row-level problems carry their line, and the expected line/column.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from hydrodrift.settings import Settings
from ingest.plant_file import PlantFileError, load_plant_file
from ingest.readers import iter_canonical_chunks
from ingest.report import ExportFormatError, FileReport
from store.signals import Quality

BAD = Path(__file__).resolve().parent / "data" / "bad"
EXPECTED = json.loads((BAD / "expected.json").read_text(encoding="utf-8"))["files"]
ROW_KINDS = {"truncated_line", "duplicate_timestamp", "bad_field_count", "bad_timestamp",
             "dst_gap", "dst_ambiguous", "not_a_number", "out_of_order", "naive_timestamp"}


def _matches(problem, expected: dict) -> bool:
    return (problem.kind == expected["kind"] and problem.line == expected["line"]
            and problem.column == expected["column"]
            and problem.severity == expected.get("severity", problem.severity)
            and all(text in problem.message for text in expected.get("mentions", ())))


def test_every_corpus_file_has_an_expectation() -> None:
    data_files = {p.name for p in BAD.iterdir()
                  if p.suffix in (".csv", ".ready") or p.name.endswith(".csv.ready")}
    assert data_files <= set(EXPECTED), data_files - set(EXPECTED)
    for name in EXPECTED:
        assert (BAD / name).exists(), name


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_corpus_file(name: str) -> None:
    expected = EXPECTED[name]
    path = BAD / name
    if expected.get("marker"):
        # marker, skipped: 0 bytes and named with the drop folder's marker suffix
        assert path.stat().st_size == 0
        assert name.endswith(Settings().marker_suffix)
        return
    if expected.get("plant_error"):
        with pytest.raises(PlantFileError) as info:
            load_plant_file(path)
        message = str(info.value)
        assert name in message  # names the file
        for text in expected["problems"][0]["mentions"]:
            assert text in message, (text, message)
        return

    plant = load_plant_file(BAD / expected["plant"])
    report = FileReport(name)
    if expected["fatal"]:
        with pytest.raises(ExportFormatError) as info:
            list(iter_canonical_chunks(path, plant, report))
        problem = info.value.problem
        assert [problem.kind] == expected["kinds"]
        assert _matches(problem, expected["problems"][0]), problem
        assert problem.where(name).startswith(name)
        return

    chunks = list(iter_canonical_chunks(path, plant, report, chunk_rows=2))
    frames = [c.frame for c in chunks]
    rows = sum(len(f) for f in frames)
    assert rows == expected["rows_loaded"]
    assert report.rows_rejected == expected["rows_rejected"]
    assert sorted({p.kind for p in report.problems}) == expected["kinds"]
    for want in expected["problems"]:
        assert any(_matches(p, want) for p in report.problems), (want, report.problems)
    for text in report.lines():
        assert text.startswith(name)
    for problem in report.problems:
        if problem.kind in ROW_KINDS:
            assert problem.line is not None, problem
    if "ambiguous_rows" in expected:
        flagged = sum(int((f["quality"] & int(Quality.AMBIGUOUS_TIME) != 0).sum())
                      for f in frames)
        assert flagged == expected["ambiguous_rows"]
    if "source_bad_rows" in expected:
        flagged = sum(int((f["quality"] & int(Quality.SOURCE_BAD) != 0).sum()) for f in frames)
        assert flagged == expected["source_bad_rows"]
    if "utc" in expected:
        stamps = sorted(ts.isoformat() for f in frames for ts in f["ts"])
        assert stamps == expected["utc"]
