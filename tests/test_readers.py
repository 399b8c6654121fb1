"""Export readers (ingest.readers) on small files written by each test."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ingest.plant_file import PlantFile, parse_plant_text
from ingest.readers import detect_plant, iter_canonical_chunks
from ingest.report import ExportFormatError, FileReport
from store.signals import SIGNAL_BIT, Quality

UNITS = """
[[units]]
code = "G1"
runner_type = "francis"
rated_power = "100 MW"
rated_head = "200 m"
rated_speed = "500 rpm"
runner_diameter = "3 m"
runner_reference_elevation = "95 m"

[[units]]
code = "G2"
runner_type = "francis"
rated_power = "100 MW"
rated_head = "200 m"
rated_speed = "500 rpm"
runner_diameter = "3 m"
runner_reference_elevation = "95 m"
"""


def make_plant(export: str, tags: str, code: str = "RDTEST") -> PlantFile:
    text = (f'[plant]\ncode = "{code}"\nname = "Reader test plant (fictional)"\n'
            'latitude = 61.0\nelevation = "120 m"\ntimezone = "Europe/Oslo"\n\n'
            f"[export]\n{export}\n{UNITS}\n[tags]\n{tags}\n")
    return parse_plant_text(text)


WIDE_TAGS = """
G1_P = { unit = "G1", signal = "active_power", uom = "MW" }
G1_T = { unit = "G1", signal = "water_temperature", uom = "degC" }
HW = { unit = "*", signal = "headwater_level", uom = "m" }
"""


def read(path: Path, plant: PlantFile, chunk_rows: int = 1000
         ) -> tuple[pd.DataFrame, FileReport, list]:
    report = FileReport(path.name)
    chunks = list(iter_canonical_chunks(path, plant, report, chunk_rows=chunk_rows))
    frame = pd.concat([c.frame for c in chunks], ignore_index=True) if chunks else None
    return frame, report, chunks


def test_decimal_comma_thousands_semicolon(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ndelimiter = ";"\ndecimal = ","\nthousands = "."\n'
                       'time_basis = "utc"\ntimestamp_format = "%d.%m.%Y %H:%M"', WIDE_TAGS)
    path = tmp_path / "comma.csv"
    path.write_text("timestamp;G1_P;G1_T;HW\n"
                    "05.01.2026 00:00;1.234,5;4,5;301,25\n"
                    "05.01.2026 00:10;1.000;5;301\n", encoding="utf-8")
    frame, report, _ = read(path, plant)
    g1 = frame[frame["unit"] == "G1"].reset_index(drop=True)
    # 1.234,5 MW = 1234.5 MW = 1.2345e9 W; 4,5 degC = 277.65 K
    assert g1["active_power"].tolist() == pytest.approx([1234.5e6, 1000e6])
    assert g1["water_temperature"].tolist() == pytest.approx([277.65, 278.15])
    assert g1["headwater_level"].tolist() == pytest.approx([301.25, 301.0])
    assert g1["ts"].tolist() == [pd.Timestamp("2026-01-05T00:00Z"),
                                 pd.Timestamp("2026-01-05T00:10Z")]
    assert report.rows_read == 2 and report.rows_rejected == 0


def test_latin1_header_with_degree_sign_and_plant_wide_tag(tmp_path: Path) -> None:
    tags = WIDE_TAGS + 'G2_P = { unit = "G2", signal = "active_power", uom = "kW" }\n' \
        '"T_°C" = { unit = "G2", signal = "water_temperature", uom = "degC" }\n'
    plant = make_plant('layout = "wide"\nencoding = "latin-1"\ntime_basis = "utc"', tags)
    path = tmp_path / "latin.csv"
    path.write_bytes("timestamp,G1_P,G2_P,T_°C,HW\n2026-01-05T00:00Z,50,60000,6,300\n"
                     .encode("latin-1"))
    frame, report, _ = read(path, plant)
    assert not report.problems
    by_unit = frame.set_index("unit")
    assert by_unit.loc["G2", "water_temperature"] == pytest.approx(279.15)
    assert by_unit.loc["G2", "active_power"] == pytest.approx(60e6)  # 60000 kW
    # the plant-wide headwater level feeds both units
    assert by_unit.loc["G1", "headwater_level"] == by_unit.loc["G2", "headwater_level"] == 300


def test_bom_in_utf8_file(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbftimestamp,G1_P\n2026-01-05T00:00Z,50\n")
    frame, report, _ = read(path, plant)
    assert len(frame) == 1 and frame["active_power"][0] == 50e6
    assert not report.problems  # the BOM did not become part of the first column name


def test_utf8_error_names_line_and_character(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "bad.csv"
    body = "timestamp,G1_P,G1_T\n" + "2026-01-05T00:00Z,50,5\n" * 3
    path.write_bytes(body.encode() + b"2026-01-05T00:00Z,5\xe9,5\n")
    with pytest.raises(ExportFormatError) as info:
        read(path, plant)
    assert info.value.problem.line == 5 and info.value.problem.column == "G1_P"
    assert "character 20" in str(info.value) and "export.encoding" in str(info.value)


def test_wrong_delimiter_names_both(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ndelimiter = ";"\ndecimal = ","\ntime_basis = "utc"',
                       WIDE_TAGS)
    path = tmp_path / "commas.csv"
    path.write_text("timestamp,G1_P\n2026-01-05T00:00Z,50\n")
    with pytest.raises(ExportFormatError) as info:
        read(path, plant)
    assert "';'" in str(info.value) and "','" in str(info.value)
    assert info.value.problem.line == 1


def test_long_pivot_with_quality_codes_and_unmapped_tag(tmp_path: Path) -> None:
    plant = make_plant('layout = "long"\ntime_basis = "offset"\nquality_column = "q"\n'
                       'good_quality = ["Good", "192"]', WIDE_TAGS)
    path = tmp_path / "long.csv"
    path.write_text(
        "timestamp,tag,value,q\n"
        "2026-01-05T01:00:00+01:00,G1_P,50,GOOD\n"
        "2026-01-05T01:00:00+01:00,HW,300,192\n"
        "2026-01-05T01:00:00+01:00,ZZ,1,good\n"
        "2026-01-05T01:10:00+01:00,G1_P,51,BAD\n"
        "2026-01-05T01:10:00+01:00,G1_T,5,good\n"
        "2026-01-05T01:10:00+01:00,ZZ,2,good\n"
        "2026-01-05T01:10:00,HW,300,good\n")
    frame, report, _ = read(path, plant)
    g1 = frame[frame["unit"] == "G1"].reset_index(drop=True)
    assert g1["ts"].tolist() == [pd.Timestamp("2026-01-05T00:00Z"),
                                 pd.Timestamp("2026-01-05T00:10Z")]
    assert g1["active_power"].tolist() == [50e6, 51e6]  # the bad-quality value is kept
    assert g1["line"].tolist() == [2, 5]
    assert g1["quality"][1] & int(Quality.SOURCE_BAD)
    assert g1["flagged_signals"][1] == SIGNAL_BIT["active_power"]
    assert g1["quality"][0] == 0
    kinds = {p.kind: p for p in report.problems}
    assert "3 row(s)" not in kinds["unmapped_tag"].message
    assert "2 row(s)" in kinds["unmapped_tag"].message and kinds["unmapped_tag"].line == 4
    assert kinds["naive_timestamp"].line == 8  # time_basis offset: a naive time is rejected
    assert report.rows_rejected == 1
    assert set(frame["unit"]) == {"G1", "G2"}  # G2 only gets the plant-wide level


def test_duplicate_across_chunk_boundary(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "dup.csv"
    times = pd.date_range("2026-01-05", periods=10, freq="10min", tz="UTC")
    rows = [f"{t.isoformat()},{50 + i * 0.37:.2f}" for i, t in enumerate(times)]
    rows.insert(7, f"{times[1].isoformat()},99")  # line 9 repeats line 3, in a later chunk
    path.write_text("timestamp,G1_P\n" + "\n".join(rows) + "\n")
    frame, report, chunks = read(path, plant, chunk_rows=4)
    assert len(chunks) > 1
    assert len(frame) == 10 and frame["ts"].is_unique
    dup = [p for p in report.problems if p.kind == "duplicate_timestamp"]
    assert len(dup) == 1 and dup[0].line == 9 and "line 3" in dup[0].message
    assert 99e6 not in frame["active_power"].tolist()
    assert report.rows_rejected == 1 and report.rows_read == 11


def test_in_order_file_lets_old_chunks_go_and_says_so_if_rows_reach_back(
    tmp_path: Path,
) -> None:
    # Memory stays bounded for in-order files: only the newest chunks' timestamps are kept.
    # A row that reaches further back is not rejected as a duplicate but named in a warning
    # (the store then merges it as a revision).
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "late.csv"
    times = pd.date_range("2026-01-05", periods=12, freq="10min", tz="UTC")
    rows = [f"{t.isoformat()},{50 + i * 0.37:.2f}" for i, t in enumerate(times)]
    rows.append(f"{times[0].isoformat()},51.5")  # line 14 repeats line 2, three chunks later
    path.write_text("timestamp,G1_P\n" + "\n".join(rows) + "\n")
    frame, report, chunks = read(path, plant, chunk_rows=4)
    assert len(chunks) >= 3
    late = [p for p in report.problems if "more than one chunk" in p.message]
    assert len(late) == 1 and late[0].line == 14 and late[0].severity == "warning"
    assert report.rows_rejected == 0 and len(frame) == 13


def test_stuck_run_across_chunk_boundary(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "stuck.csv"
    times = pd.date_range("2026-01-05", periods=24, freq="15min", tz="UTC")
    values = [50 + 0.3 * i for i in range(24)]
    for i in range(6, 14):
        values[i] = 61.5  # frozen for 8 samples = 105 min, lines 8..15
    path.write_text("timestamp,G1_P\n" + "\n".join(
        f"{t.isoformat()},{v:.2f}" for t, v in zip(times, values, strict=True)) + "\n")
    frame, report, chunks = read(path, plant, chunk_rows=10)
    assert len(chunks) > 1
    stuck = frame.loc[(frame["quality"] & int(Quality.STUCK)) != 0, "line"].tolist()
    assert stuck == list(range(8, 16))
    warn = [p for p in report.problems if p.kind == "stuck"]
    assert len(warn) == 1 and warn[0].line == 8 and "8 value(s)" in warn[0].message
    assert report.cells_flagged == 8


def test_local_fold_inferred_across_chunks_and_skip_lines(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "local"\nskip_lines = 2', WIDE_TAGS)
    path = tmp_path / "fold.csv"
    walls = ["01:30", "02:00", "02:30", "02:00", "02:30", "03:00"]
    path.write_text("exported by a fictional historian\nsecond preamble line\n"
                    "timestamp,G1_P\n" + "".join(
                        f"2026-10-25 {w},{50 + i}\n" for i, w in enumerate(walls)))
    frame, report, _ = read(path, plant, chunk_rows=3)
    assert frame["ts"].tolist() == [pd.Timestamp(t) for t in (
        "2026-10-24T23:30Z", "2026-10-25T00:00Z", "2026-10-25T00:30Z",
        "2026-10-25T01:00Z", "2026-10-25T01:30Z", "2026-10-25T02:00Z")]
    ambiguous = (frame["quality"] & int(Quality.AMBIGUOUS_TIME)) != 0
    assert ambiguous.tolist() == [False, True, True, True, True, False]
    assert frame["line"].tolist() == [4, 5, 6, 7, 8, 9]
    assert not report.problems


def test_not_a_number_and_sentinel_cells(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "cells.csv"
    path.write_text("timestamp,G1_P,G1_T\n2026-01-05T00:00Z,-9999,inf\n"
                    "2026-01-05T00:10Z,abc,5\n")
    frame, report, _ = read(path, plant)
    assert np.isnan(frame["active_power"]).all()
    assert frame["quality"][0] & int(Quality.SENTINEL)
    assert frame["quality"][0] & int(Quality.NOT_A_NUMBER)
    assert frame["quality"][1] & int(Quality.NOT_A_NUMBER)
    nan_lines = sorted((p.line, p.column) for p in report.problems if p.kind == "not_a_number")
    assert nan_lines == [(2, "G1_T"), (3, "G1_P")]
    assert report.cells_flagged == 3


def test_no_mapped_tag_and_header_only(tmp_path: Path) -> None:
    plant = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS)
    path = tmp_path / "none.csv"
    path.write_text("timestamp,X1,X2\n2026-01-05T00:00Z,1,2\n")
    with pytest.raises(ExportFormatError) as info:
        read(path, plant)
    assert "'X1'" in str(info.value)
    path.write_text("timestamp,G1_P\n")
    _, report, chunks = read(path, plant)
    assert chunks == [] and [p.kind for p in report.problems] == ["no_data"]


def test_detect_plant(tmp_path: Path) -> None:
    first = make_plant('layout = "wide"\ntime_basis = "utc"', WIDE_TAGS, code="A")
    other_tags = 'B_P = { unit = "G1", signal = "active_power", uom = "MW" }\n'
    second = make_plant('layout = "wide"\ndelimiter = ";"\ntime_basis = "utc"', other_tags,
                        code="B")
    path = tmp_path / "x.csv"
    path.write_text("timestamp;B_P;G1_P\n")
    assert detect_plant(path, [first, second]) is second
    path.write_text("timestamp,Q1\n")
    assert detect_plant(path, [first, second]) is None
