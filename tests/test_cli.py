"""The command line as a user meets it (SQLite, in-process)."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from hydrodrift import cli
from hydrodrift.cli import app
from hydrodrift.settings import get_settings
from tests.conftest import TEST_DATA

runner = CliRunner()


@pytest.fixture
def env(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Path]:
    monkeypatch.setenv("HYDRODRIFT_DATA_DIR", str(tmp_path / "data"))
    monkeypatch.setenv("HYDRODRIFT_DATABASE_URL", f"sqlite:///{tmp_path / 'cli.sqlite3'}")
    get_settings.cache_clear()
    # a wide console, so that table cells are not folded in the captured output
    monkeypatch.setattr(cli, "out", Console(width=220))
    monkeypatch.setattr(cli, "err", Console(width=220, stderr=True))
    yield tmp_path
    get_settings.cache_clear()


def test_db_upgrade_then_current(env: Path) -> None:
    first = runner.invoke(app, ["db", "upgrade"])
    assert first.exit_code == 0, first.output
    assert "upgraded (empty) ->" in first.output
    again = runner.invoke(app, ["db", "upgrade"])
    assert "already at revision" in again.output


def test_plant_import_list_and_a_bad_file(env: Path) -> None:
    ok = runner.invoke(app, ["plant", "import", str(TEST_DATA / "plants" / "test_wide.toml")])
    assert ok.exit_code == 0, ok.output
    assert "plant TW: created (version 1)" in ok.output
    listed = runner.invoke(app, ["plant", "list"])
    assert "U1" in listed.output and "60.0 MW" in listed.output
    bad = runner.invoke(app, ["plant", "import",
                              str(TEST_DATA / "bad" / "plant_unknown_unit.toml")])
    assert bad.exit_code == 1
    assert "megawattish" in bad.output and "plant_unknown_unit.toml" in bad.output


def test_ingest_summary_files_list_and_show(env: Path) -> None:
    runner.invoke(app, ["plant", "import", str(TEST_DATA / "bad" / "plant_badtest.toml")])
    files = [str(TEST_DATA / "bad" / name) for name in
             ("duplicate_timestamps.csv", "wrong_delimiter.csv", "export_20260105.csv.ready")]
    result = runner.invoke(app, ["ingest", "--quiet", *files])
    assert result.exit_code == 1  # one file was quarantined
    assert "ingestion summary" in result.output
    assert "duplicate_timestamps.csv:4" in result.output  # file and line of the problem
    assert "quarantined" in result.output and "completion marker" in result.output
    listed = runner.invoke(app, ["files", "list"])
    assert "duplicate_timestamps.csv" in listed.output and "quarantined" in listed.output
    shown = runner.invoke(app, ["files", "show", "1"])
    assert shown.exit_code == 0 and "duplicate_timestamp" in shown.output
    missing = runner.invoke(app, ["files", "show", "99"])
    assert missing.exit_code == 1 and "no ingested file with id 99" in missing.output


def test_pull_ingests_complete_files_of_a_drop_folder(env: Path) -> None:
    drop = env / "drop"
    drop.mkdir()
    plant = env / "plant.toml"
    plant.write_text((TEST_DATA / "plants" / "test_wide.toml").read_text().replace(
        "[[units]]", f'[[sources]]\nkind = "folder"\npath = "{drop}"\n\n[[units]]', 1))
    assert runner.invoke(app, ["plant", "import", str(plant)]).exit_code == 0
    done = drop / "day.csv"
    done.write_text("timestamp,P1,HW\n2026-03-02T00:00:00+00:00,40.5,785.1\n"
                    "2026-03-02T00:10:00+00:00,41.0,785.2\n")
    (drop / "day.csv.ready").write_bytes(b"")  # the exporter's completion marker
    growing = drop / "next.csv"
    growing.write_text("timestamp,P1,HW\n")  # just created, no marker: not read yet
    result = runner.invoke(app, ["pull"])
    assert result.exit_code == 0, result.output
    assert "day.csv" in result.output and "loaded" in result.output
    assert "next.csv: skipped, still changing or too new" in result.output
    again = runner.invoke(app, ["pull"])
    assert "already ingested" in again.output
