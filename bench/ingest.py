"""Ingestion benchmark: the full ingestion path against bare loads of the same file.

Run ``python bench/ingest.py [--rows N]`` (default 1,000,000 rows). It writes a wide
export CSV of one fictional unit (timestamp + 11 tags, 1 s apart) to a temporary folder,
then times, each in a child process of its own (so that each peak RSS is that path's):

PostgreSQL (a fresh schema per path, dropped at the end)
    ``pg_full``  ``ingest.pipeline.ingest_file`` of the CSV into a migrated schema with
                 the bench plant imported by ``ingest.registry.import_plant_file``;
    ``pg_copy``  baseline: ``COPY bare_samples (ts, <11 columns>) FROM STDIN (FORMAT csv,
                 HEADER true)`` of the same file's bytes, into a table with the same
                 columns and primary key ``(unit_id, ts)`` (``unit_id`` from a column
                 default), timed from the COPY statement to the end of the commit.
SQLite (a fresh database file per path)
    ``sqlite_full``  ``ingest_file`` into a migrated file database;
    ``sqlite_bare``  baseline: stdlib ``csv.reader`` over the file into ``executemany``
                     of ``INSERT INTO bare_samples VALUES (1, ?, ...)`` (a WITHOUT ROWID
                     table keyed ``(unit_id, ts)``, same columns; the time text is stored
                     as read) in one transaction, timed from opening the file to commit.

When the full path cannot be imported or fails, the script says so and measures
``store.bulk.load_samples`` alone instead (``*_load``): the CSV is read and converted to
SI with pandas untimed, and one ``load_samples`` call plus its commit is timed. The JSON
line names which was measured (``measured``). Setup (schema migration, plant import,
table creation) is never timed. The last line of output is one JSON object.
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import resource
import secrets
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

# Run as ``python bench/ingest.py`` this file's folder comes first on sys.path, and this
# script's own name would shadow the ``ingest`` package: drop the folder, add the repo.
_BENCH_DIR = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _BENCH_DIR]
if str(_BENCH_DIR.parent) not in sys.path:
    sys.path.insert(0, str(_BENCH_DIR.parent))

DEFAULT_PG_URL = os.environ.get(
    "HYDRODRIFT_BENCH_PG_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test"
)
START_EPOCH_S = 1_714_521_600  # 2024-05-01T00:00:00Z
GENERATE_BLOCK_ROWS = 100_000

#: The bench unit's tags: (tag, canonical signal, unit of measure as exported,
#: typical value, spread). Invented values of a fictional ~100 MW Francis unit.
TAGS: tuple[tuple[str, str, str, float, float], ...] = (
    ("BX_G1_P", "active_power", "MW", 85.0, 20.0),
    ("BX_HW_LVL", "headwater_level", "m", 412.0, 1.5),
    ("BX_TW_LVL", "tailwater_level", "m", 12.0, 0.4),
    ("BX_G1_WK_DP", "wk_differential_pressure", "kPa", 42.0, 9.0),
    ("BX_G1_GV", "gate_opening", "percent", 70.0, 15.0),
    ("BX_G1_SPD", "rotational_speed", "rpm", 333.3, 0.3),
    ("BX_G1_SCP", "spiral_case_pressure", "bar", 39.5, 0.6),
    ("BX_G1_DTP", "draft_tube_pressure", "kPa", -18.0, 4.0),
    ("BX_G1_BRG_VIB", "bearing_vibration", "mm/s", 1.3, 0.3),
    ("BX_G1_GB_T", "guide_bearing_temperature", "degC", 55.0, 3.0),
    ("BX_WATER_T", "water_temperature", "degC", 6.5, 1.0),
)

PLANT_TOML = """\
# Fictional plant for the ingestion benchmark (invented data, no real site).
[plant]
code = "BENCHX"
name = "Benchmark plant (fictional)"
latitude = 61.2
elevation = "300 m"
timezone = "Europe/Oslo"

[export]
layout = "wide"
delimiter = ","
timestamp_column = "timestamp"
timestamp_format = "ISO8601"
time_basis = "offset"

[[units]]
code = "G1"
runner_type = "francis"
rated_power = "105 MW"
rated_head = "400 m"
rated_speed = "333.3 rpm"
runner_diameter = "2.4 m"
runner_reference_elevation = "8 m"
"""


def _plant_toml() -> str:
    lines = [PLANT_TOML]
    for tag, signal, uom, _, _ in TAGS:
        lines.append(f'[tags.{tag}]\nunit = "G1"\nsignal = "{signal}"\nuom = "{uom}"\n')
    return "\n".join(lines)


def _peak_rss_mb() -> float:
    """This process's peak resident set size [MB].

    Linux: ``VmHWM`` of ``/proc/self/status``. ``getrusage(RUSAGE_SELF).ru_maxrss`` is
    not used there because Linux carries it across fork and execve: a child would report
    at least the parent's peak (measured here: a child of a parent holding 400 MB of
    arrays reported 407 MB by ru_maxrss, 11 MB by VmHWM). Elsewhere: ru_maxrss (KiB on
    Linux and BSD; macOS reports bytes, not handled).
    """
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


# --------------------------------------------------------------------------- generation


def generate_csv(path: Path, rows: int, seed: int = 1) -> None:
    """Write the wide export: ``timestamp`` (ISO 8601, Z) and the 11 tags, 3 decimals."""
    import pyarrow as pa
    import pyarrow.csv as pa_csv
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    rng = np.random.default_rng(seed)
    names = ["timestamp", *(tag for tag, *_ in TAGS)]
    options = pa_csv.WriteOptions(include_header=False, quoting_style="none")
    with path.open("wb") as sink, Progress(
        TextColumn("generating export"), BarColumn(), TextColumn("{task.completed:,} rows"),
        TimeRemainingColumn(), transient=False, disable=not sys.stderr.isatty(),
    ) as progress:
        sink.write((",".join(names) + "\n").encode())
        task = progress.add_task("generate", total=rows)
        for start in range(0, rows, GENERATE_BLOCK_ROWS):
            n = min(GENERATE_BLOCK_ROWS, rows - start)
            seconds = START_EPOCH_S + np.arange(start, start + n, dtype=np.int64)
            stamps = np.char.add(np.datetime_as_string(seconds.astype("datetime64[s]")), "Z")
            phase = 2 * np.pi * seconds / 86_400.0  # a daily load cycle
            columns: dict[str, Any] = {"timestamp": pa.array(stamps)}
            for tag, _, _, typical, spread in TAGS:
                values = typical + spread * (0.6 * np.sin(phase) + 0.1 * rng.standard_normal(n))
                values = np.round(values, 3)
                values[rng.random(n) < 1e-4] = np.nan  # rare gaps, as exports have
                columns[tag] = pa.array(values, from_pandas=True)
            pa_csv.write_csv(pa.table(columns), sink, options)
            progress.update(task, advance=n)
            if not sys.stderr.isatty() and (start // GENERATE_BLOCK_ROWS) % 5 == 4:
                print(f"  generated {start + n:,} of {rows:,} rows", flush=True)


# --------------------------------------------------------------------------- children


def _engine_for(kind: str, args: argparse.Namespace) -> Any:
    from store.engine import make_engine

    if kind.startswith("pg"):
        return make_engine(args.pg_url, schema=args.schema)
    return make_engine(f"sqlite:///{args.workdir / (kind + '.sqlite3')}")


def _settings(args: argparse.Namespace, kind: str) -> Any:
    from hydrodrift.settings import Settings

    if kind.startswith("pg"):
        return Settings(data_dir=args.workdir / kind, database_url=args.pg_url,
                        database_schema=args.schema)
    return Settings(data_dir=args.workdir / kind,
                    database_url=f"sqlite:///{args.workdir / (kind + '.sqlite3')}")


def _count_samples(engine: Any) -> int:
    from sqlalchemy import text

    with engine.connect() as conn:
        return int(conn.execute(text("SELECT count(*) FROM samples")).scalar_one())


def child_full(kind: str, args: argparse.Namespace) -> dict[str, Any]:
    """Full ingestion path: import the plant (untimed), then time ``ingest_file``."""
    from ingest.pipeline import ingest_file
    from ingest.registry import import_plant_file
    from store.migrate import upgrade

    engine = _engine_for(kind, args)
    upgrade(engine)
    import_plant_file(engine, args.plant)
    settings = _settings(args, kind)
    started = time.perf_counter()
    outcome = ingest_file(engine, args.csv, settings=settings)
    seconds = time.perf_counter() - started
    stored = _count_samples(engine)
    if outcome.status != "loaded" or stored != args.rows:
        raise RuntimeError(f"ingest_file: status {outcome.status!r}, {outcome.message}; "
                           f"{stored} samples stored, expected {args.rows}")
    return {"seconds": seconds, "rows": stored, "message": outcome.message}


def child_prep(args: argparse.Namespace) -> dict[str, Any]:
    """Write the CSV as a canonical SI frame to ``frame.npz`` for the ``*_load`` children.

    Done once, in a child of its own, so that the pandas read (whose peak memory is not
    the loader's) stays out of the loaders' peak RSS.
    """
    import pandas as pd

    from ingest.plant_file import load_plant_file

    plant = load_plant_file(args.plant)
    raw = pd.read_csv(args.csv, engine="pyarrow")
    stamps = pd.to_datetime(raw["timestamp"], format="ISO8601", utc=True)
    arrays = {"ts_us": stamps.dt.as_unit("us").dt.tz_localize(None).to_numpy()
              .view(np.int64)}
    for tag, mapping in plant.tags.items():
        a, b = mapping.to_si()
        arrays[mapping.signal] = raw[tag].to_numpy(dtype=np.float64) * a + b
    np.savez(args.workdir / "frame.npz", **arrays)
    return {"seconds": 0.0, "rows": len(raw), "message": "prepared"}


def _si_frame(args: argparse.Namespace, unit_id: int) -> tuple[Any, tuple[str, ...]]:
    """The canonical frame written by :func:`child_prep`."""
    import pandas as pd

    with np.load(args.workdir / "frame.npz") as stored:
        arrays = {name: stored[name] for name in stored.files}
    n = len(arrays["ts_us"])
    signals = tuple(name for name in arrays if name != "ts_us")
    frame = pd.DataFrame({
        "unit_id": np.full(n, unit_id, np.int64),
        "ts": pd.to_datetime(arrays.pop("ts_us"), unit="us", utc=True),
        **arrays,
        "quality": np.zeros(n, np.int64),
        "flagged_signals": np.zeros(n, np.int64),
    })
    return frame, signals


def child_load(kind: str, args: argparse.Namespace) -> dict[str, Any]:
    """``load_samples`` alone: frame prepared untimed; one call plus commit timed."""
    from sqlalchemy import insert, text

    from store.bulk import load_samples
    from store.migrate import upgrade
    from store.models import Plant, Unit

    engine = _engine_for(kind, args)
    upgrade(engine)
    with engine.begin() as conn:
        conn.execute(insert(Plant), [dict(id=1, code="BENCHX", name="Benchmark (fictional)",
                                          latitude_deg=61.2, elevation_m=300.0,
                                          timezone="Europe/Oslo")])
        conn.execute(insert(Unit), [dict(id=1, plant_id=1, code="G1", runner_type="francis")])
        if kind.endswith("nofk"):
            conn.execute(text("ALTER TABLE samples DROP CONSTRAINT samples_unit_id_fkey"))
    frame, signals = _si_frame(args, unit_id=1)
    started = time.perf_counter()
    with engine.begin() as conn:
        counts = load_samples(conn, frame, provided_signals=signals, source_file_id=None)
    seconds = time.perf_counter() - started
    stored = _count_samples(engine)
    if counts.new != args.rows or stored != args.rows:
        raise RuntimeError(f"load_samples: {counts}; {stored} stored, expected {args.rows} new")
    return {"seconds": seconds, "rows": stored, "message": str(counts)}


def child_pg_copy(args: argparse.Namespace) -> dict[str, Any]:
    """Bare COPY of the CSV bytes into a keyed table of the same shape."""
    import psycopg
    from sqlalchemy.engine import make_url

    url = make_url(args.pg_url).set(drivername="postgresql").render_as_string(False)
    columns = ", ".join(f"{signal} double precision" for _, signal, *_ in TAGS)
    with psycopg.connect(url, options=f"-csearch_path={args.schema}") as conn:
        conn.execute(f'CREATE SCHEMA IF NOT EXISTS "{args.schema}"')
        conn.execute("CREATE TABLE bare_samples (unit_id integer NOT NULL DEFAULT 1, "
                     f"ts timestamptz NOT NULL, {columns}, PRIMARY KEY (unit_id, ts))")
        conn.commit()
        targets = ", ".join(signal for _, signal, *_ in TAGS)
        started = time.perf_counter()
        with conn.cursor() as cursor, cursor.copy(
            f"COPY bare_samples (ts, {targets}) FROM STDIN (FORMAT csv, HEADER true)"
        ) as copy, args.csv.open("rb") as source:
            while block := source.read(1 << 20):
                copy.write(block)
        conn.commit()
        seconds = time.perf_counter() - started
        stored = conn.execute("SELECT count(*) FROM bare_samples").fetchone()
    rows = int(stored[0]) if stored else 0
    if rows != args.rows:
        raise RuntimeError(f"bare COPY stored {rows} rows, expected {args.rows}")
    return {"seconds": seconds, "rows": rows, "message": "bare COPY"}


def child_sqlite_bare(args: argparse.Namespace) -> dict[str, Any]:
    """stdlib csv read plus executemany into a keyed table, one transaction."""
    import sqlite3

    path = args.workdir / "sqlite_bare.sqlite3"
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA journal_mode=WAL")  # as store.engine sets for the store
    conn.execute("PRAGMA synchronous=NORMAL")
    columns = ", ".join(f"{signal} REAL" for _, signal, *_ in TAGS)
    conn.execute(f"CREATE TABLE bare_samples (unit_id INTEGER NOT NULL, ts INTEGER NOT NULL, "
                 f"{columns}, PRIMARY KEY (unit_id, ts)) WITHOUT ROWID")
    conn.commit()
    marks = ", ".join("?" for _ in range(len(TAGS) + 1))
    started = time.perf_counter()
    with args.csv.open(newline="") as source:
        reader = csv.reader(source)
        next(reader)
        conn.executemany(f"INSERT INTO bare_samples VALUES (1, {marks})", reader)
    conn.commit()
    seconds = time.perf_counter() - started
    rows = conn.execute("SELECT count(*) FROM bare_samples").fetchone()[0]
    conn.close()
    if rows != args.rows:
        raise RuntimeError(f"bare SQLite load stored {rows} rows, expected {args.rows}")
    return {"seconds": seconds, "rows": rows, "message": "csv.reader + executemany"}


def run_child(args: argparse.Namespace) -> None:
    kind = args.child
    if kind == "pg_copy":
        result = child_pg_copy(args)
    elif kind == "sqlite_bare":
        result = child_sqlite_bare(args)
    elif kind == "prep":
        result = child_prep(args)
    elif kind.endswith("_full"):
        result = child_full(kind, args)
    else:
        result = child_load(kind, args)
    result["peak_rss_mb"] = _peak_rss_mb()
    print(json.dumps(result))


# --------------------------------------------------------------------------- parent


def _spawn(kind: str, args: argparse.Namespace, csv_path: Path, plant_path: Path,
           workdir: Path, schema: str | None) -> dict[str, Any]:
    command = [sys.executable, str(Path(__file__).resolve()), "--child", kind,
               "--rows", str(args.rows), "--csv", str(csv_path), "--plant", str(plant_path),
               "--workdir", str(workdir), "--pg-url", args.pg_url]
    if schema is not None:
        command += ["--schema", schema]
    done = subprocess.run(command, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        tail = "\n".join((done.stderr or done.stdout).strip().splitlines()[-6:])
        return {"error": f"{kind} failed (exit {done.returncode}):\n{tail}"}
    return json.loads(done.stdout.strip().splitlines()[-1])


def _pipeline_import_error() -> str | None:
    try:
        from ingest.pipeline import ingest_file  # noqa: F401
        from ingest.registry import import_plant_file  # noqa: F401
    except ImportError as exc:
        return f"{type(exc).__name__}: {exc}"
    return None


def _pg_reachable(url: str) -> str | None:
    from sqlalchemy import text

    from store.engine import make_engine

    try:
        engine = make_engine(url)
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
        engine.dispose()
    except Exception as exc:  # any failure to connect
        return f"{type(exc).__name__}: {exc}"
    return None


def _report(label: str, result: dict[str, Any]) -> None:
    if "error" in result:
        print(f"{label:<44} FAILED\n{result['error']}")
        return
    rate = result["rows"] / result["seconds"]
    print(f"{label:<44} {result['rows']:>10,} rows {result['seconds']:7.2f} s "
          f"{rate:>11,.0f} rows/s  peak RSS {result['peak_rss_mb']:6.0f} MB")


def _measure(kinds: list[str], args: argparse.Namespace, csv_path: Path, plant_path: Path,
             workdir: Path, schemas: dict[str, str]) -> dict[str, dict[str, Any]]:
    results = {}
    needs_frame = any(k.endswith(("_load", "_nofk")) for k in kinds)
    if needs_frame and not (workdir / "frame.npz").exists():
        print("preparing the canonical frame for load_samples (untimed) ...", flush=True)
        prepared = _spawn("prep", args, csv_path, plant_path, workdir, None)
        if "error" in prepared:
            raise RuntimeError(prepared["error"])
    for kind in kinds:
        print(f"running {kind} ...", flush=True)
        results[kind] = _spawn(kind, args, csv_path, plant_path, workdir, schemas.get(kind))
    return results


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--pg-url", default=DEFAULT_PG_URL)
    parser.add_argument("--no-pg", action="store_true", help="skip PostgreSQL")
    parser.add_argument("--load-only", action="store_true",
                        help="measure store.bulk.load_samples instead of the full path")
    parser.add_argument("--fk-diagnostic", action="store_true",
                        help="also time load_samples on PostgreSQL with samples' foreign key "
                        "to units dropped (in the bench's own schema): shows the FK's cost")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--csv", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--plant", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--workdir", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--schema", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.rows < 1:
        parser.error("--rows must be at least 1")
    if args.child:
        run_child(args)
        return 0

    from ingest.plant_file import load_plant_file
    from store.engine import drop_schema, make_engine

    workdir = Path(tempfile.mkdtemp(prefix="hd_bench_"))
    schemas: dict[str, str] = {}
    try:
        csv_path = workdir / "bench_export.csv"
        plant_path = workdir / "bench_plant.toml"
        plant_path.write_text(_plant_toml(), encoding="utf-8")
        load_plant_file(plant_path)  # fail early if the bench's own plant file is wrong
        started = time.perf_counter()
        generate_csv(csv_path, args.rows)
        size_mb = csv_path.stat().st_size / 1e6
        print(f"export: {csv_path} ({args.rows:,} rows x {len(TAGS) + 1} columns, "
              f"{size_mb:.0f} MB) in {time.perf_counter() - started:.1f} s")

        problem = _pipeline_import_error()
        measured = "ingest_file"
        if args.load_only:
            measured = "load_samples"
        elif problem is not None:
            print(f"full ingestion path not importable ({problem}); measuring "
                  "store.bulk.load_samples alone instead")
            measured = "load_samples"
        suffix = "_full" if measured == "ingest_file" else "_load"

        pg_problem = None if args.no_pg else _pg_reachable(args.pg_url)
        if pg_problem is not None:
            print(f"PostgreSQL at {args.pg_url} not reachable: {pg_problem}")
            return 2
        kinds = ["sqlite_bare", "sqlite" + suffix]
        if not args.no_pg:
            kinds = ["pg_copy", "pg" + suffix, *kinds]
            if args.fk_diagnostic:
                extra = ["pg_load_nofk"] if suffix == "_load" else ["pg_load", "pg_load_nofk"]
                kinds[2:2] = extra
            tag = f"{os.getpid()}_{secrets.token_hex(3)}"
            schemas = {k: f"hd_bench_{tag}_{i}" for i, k in enumerate(kinds)
                       if k.startswith("pg")}
        results = _measure(kinds, args, csv_path, plant_path, workdir, schemas)

        if measured == "ingest_file" and any("error" in results[k] for k in kinds
                                             if k.endswith("_full")):
            for kind in [k for k in kinds if k.endswith("_full")]:
                _report(kind, results[kind])
            print("full ingestion path failed; measuring store.bulk.load_samples alone "
                  "instead (figures below are load_samples, not ingest_file)")
            measured, suffix = "load_samples", "_load"
            retry = [k.replace("_full", "_load") for k in kinds
                     if k.endswith("_full") and k.replace("_full", "_load") not in results]
            for kind in retry:
                if kind.startswith("pg"):
                    schemas[kind] = schemas[kind.replace("_load", "_full")] + "r"
            results.update(_measure(retry, args, csv_path, plant_path, workdir, schemas))
            kinds = list(dict.fromkeys(k.replace("_full", "_load") for k in kinds))

        labels = {
            "pg_copy": "PostgreSQL bare COPY (baseline)",
            "pg_full": "PostgreSQL ingest_file (full path)",
            "pg_load": "PostgreSQL load_samples alone",
            "pg_load_nofk": "PostgreSQL load_samples, FK dropped (diag.)",
            "sqlite_bare": "SQLite csv + executemany (baseline)",
            "sqlite_full": "SQLite ingest_file (full path)",
            "sqlite_load": "SQLite load_samples alone",
        }
        for kind in kinds:
            _report(labels[kind], results[kind])

        def rate(kind: str) -> float | None:
            result = results.get(kind, {})
            return None if "error" in result or not result else result["rows"] / result["seconds"]

        def ratio(path: str, base: str) -> float | None:
            a, b = rate(path), rate(base)
            return None if a is None or b is None else round(b / a, 3)

        measured_kinds = {"pg_copy", "sqlite_bare", "pg" + suffix, "sqlite" + suffix}
        summary = {
            "rows": args.rows,
            "measured": measured,
            "pg_rows_per_s": None if args.no_pg else rate("pg" + suffix),
            "pg_copy_rows_per_s": None if args.no_pg else rate("pg_copy"),
            "pg_ratio_vs_copy": None if args.no_pg else ratio("pg" + suffix, "pg_copy"),
            "sqlite_rows_per_s": rate("sqlite" + suffix),
            "sqlite_bare_rows_per_s": rate("sqlite_bare"),
            "sqlite_ratio_vs_bare": ratio("sqlite" + suffix, "sqlite_bare"),
            # the measured paths and their baselines; diagnostics are listed by path only
            "peak_rss_mb": round(max((r["peak_rss_mb"] for k, r in results.items()
                                      if "peak_rss_mb" in r and k in measured_kinds),
                                     default=0.0), 1),
            "peak_rss_mb_by_path": {k: round(r["peak_rss_mb"], 1) for k, r in results.items()
                                    if "peak_rss_mb" in r},
            "errors": {k: r["error"] for k, r in results.items() if "error" in r},
        }
        if args.fk_diagnostic and not args.no_pg:
            summary["pg_load_rows_per_s"] = rate("pg_load")
            summary["pg_load_nofk_rows_per_s"] = rate("pg_load_nofk")
        for key in ("pg_rows_per_s", "pg_copy_rows_per_s", "sqlite_rows_per_s",
                    "sqlite_bare_rows_per_s", "pg_load_rows_per_s", "pg_load_nofk_rows_per_s"):
            if summary.get(key) is not None:
                summary[key] = round(summary[key])
        print("ratios are time of the path / time of its baseline (targets <= 2.0); "
              "peak RSS target < 1024 MB")
        print(json.dumps(summary))
        return 1 if summary["errors"] else 0
    finally:
        for schema in schemas.values():
            drop_schema(make_engine(args.pg_url), schema)
        shutil.rmtree(workdir, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
