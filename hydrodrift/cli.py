"""The ``hydrodrift`` command line."""

from __future__ import annotations

import sys
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    ProgressColumn,
    Task,
    TextColumn,
    TimeElapsedColumn,
)
from rich.table import Table
from rich.text import Text
from sqlalchemy import Engine, func, select

from hydrodrift import __version__
from hydrodrift.settings import Settings, get_settings

app = typer.Typer(add_completion=False, no_args_is_help=True,
                  help="Efficiency drift, lost energy and alerts for hydro units.")
db_app = typer.Typer(no_args_is_help=True, help="Database schema.")
plant_app = typer.Typer(no_args_is_help=True, help="The plant registry.")
files_app = typer.Typer(no_args_is_help=True, help="Ingested and quarantined files.")
alerts_app = typer.Typer(invoke_without_command=True,
                         help="Alert episodes: list the open ones, acknowledge, resolve.")
detector_app = typer.Typer(no_args_is_help=True, help="Anomaly detectors per unit.")
app.add_typer(db_app, name="db")
app.add_typer(plant_app, name="plant")
app.add_typer(files_app, name="files")
app.add_typer(alerts_app, name="alerts")
app.add_typer(detector_app, name="detector")

# Piped or redirected output is not folded to 80 columns: tables stay one row per file.
out = Console(width=None if sys.stdout.isatty() else 160)
err = Console(stderr=True, width=None if sys.stderr.isatty() else 160)

SAFETY_NOTE = (
    "hydrodrift advises; it never commands a unit. Operating limits, protection settings, "
    "local codes and licensed practice prevail."
)


def _engine(settings: Settings, *, migrate: bool = True) -> Engine:
    from store.engine import make_engine
    from store.migrate import ensure_schema

    engine = make_engine(settings.effective_database_url, schema=settings.database_schema)
    if migrate:
        ensure_schema(engine)
    return engine


@app.callback()
def _root(
    version: Annotated[bool, typer.Option("--version", help="Print the version.")] = False,
) -> None:
    if version:
        out.print(f"hydrodrift {__version__}")
        raise typer.Exit()


# --------------------------------------------------------------------------- db
@db_app.command("upgrade")
def db_upgrade() -> None:
    """Bring the database schema to the newest revision."""
    from store.migrate import current_revision, upgrade

    settings = get_settings()
    engine = _engine(settings, migrate=False)
    before = current_revision(engine)
    upgrade(engine)
    after = current_revision(engine)
    where = engine.url.render_as_string(hide_password=True)
    if before == after:
        out.print(f"database {where}: already at revision {after}")
    else:
        out.print(f"database {where}: upgraded {before or '(empty)'} -> {after}")


@db_app.command("current")
def db_current() -> None:
    """Print the schema revision of the database and of this code."""
    from store.migrate import current_revision, head_revision

    engine = _engine(get_settings(), migrate=False)
    out.print(f"database: {current_revision(engine) or '(empty)'}; code: {head_revision()}")


# --------------------------------------------------------------------------- plant
@plant_app.command("import")
def plant_import(
    files: Annotated[list[Path], typer.Argument(help="Plant files (TOML).", exists=False)],
) -> None:
    """Create a plant and its units, or add new versions of them, from plant files."""
    from ingest.plant_file import PlantFileError
    from ingest.registry import import_plant_file

    engine = _engine(get_settings())
    failed = False
    for path in files:
        try:
            result = import_plant_file(engine, path)
        except PlantFileError as exc:
            err.print(Text(str(exc), style="red"))
            failed = True
            continue
        out.print(f"{path}: {result.summary()}")
    if failed:
        raise typer.Exit(1)


@plant_app.command("list")
def plant_list() -> None:
    """List the plants and units in the registry with their configuration versions."""
    from store.engine import session_scope
    from store.models import Plant, Unit, UnitConfigVersion

    engine = _engine(get_settings())
    table = Table("plant", "unit", "runner", "version", "effective from (UTC)", "rated power")
    with session_scope(engine) as session:
        for plant in session.scalars(select(Plant).order_by(Plant.code)):
            for unit in session.scalars(select(Unit).where(Unit.plant_id == plant.id)
                                        .order_by(Unit.code)):
                newest = session.scalar(
                    select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
                    .order_by(UnitConfigVersion.version.desc()).limit(1))
                if newest is None:
                    continue
                power = newest.config.get("rated_power", 0.0) / 1e6
                table.add_row(plant.code, unit.code, unit.runner_type, str(newest.version),
                              f"{newest.effective_from:%Y-%m-%d %H:%M}", f"{power:.1f} MW")
    out.print(table)


# --------------------------------------------------------------------------- ingest
class _RowsPerSecond(ProgressColumn):
    def render(self, task: Task) -> Text:
        speed = task.finished_speed or task.speed
        return Text(f"{speed:,.0f} rows/s" if speed else "", style="cyan")


@contextmanager
def _progress(enabled: bool) -> Iterator[Progress | None]:
    if not enabled:
        yield None
        return
    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                  _RowsPerSecond(), TimeElapsedColumn(), console=err, transient=False) as bar:
        yield bar


def _expand(paths: Sequence[Path], settings: Settings) -> list[Path]:
    """Files to ingest: files as given, folders as drop folders (complete files only)."""
    from ingest.sources import DropFolder

    found: list[Path] = []
    for path in paths:
        if path.is_dir():
            scan = DropFolder(path, pattern="*", stable_seconds=settings.stable_seconds,
                              marker_suffix=settings.marker_suffix).scan()
            for waiting, why in scan.waiting.items():
                err.print(f"{waiting}: skipped, {why}")
            found.extend(scan.ready)
        else:
            found.append(path)
    return found


def run_ingest(engine: Engine, paths: Sequence[Path], settings: Settings, *,
               plant_code: str | None = None, show_progress: bool = True) -> list:
    """Ingest files with a progress bar (or plain progress lines when not on a terminal)."""
    from ingest.pipeline import FileOutcome, ingest_file

    outcomes: list[FileOutcome] = []
    interactive = show_progress and err.is_terminal
    with _progress(interactive) as bar:
        for path in paths:
            task = bar.add_task(path.name, total=None) if bar is not None else None
            started = time.perf_counter()

            def progress(done: int, total: int, _task=task, _path=path,
                         _started=started) -> None:
                if bar is not None and _task is not None:
                    bar.update(_task, completed=done, total=total)
                elif show_progress:
                    rate = done / max(time.perf_counter() - _started, 1e-9)
                    err.print(f"{_path.name}: {done:,}/{total:,} rows ({rate:,.0f} rows/s)",
                              highlight=False)

            if not path.exists():
                outcomes.append(FileOutcome(path=path, status="skipped",
                                            message="no such file"))
                continue
            outcome = ingest_file(engine, path, settings=settings, plant_code=plant_code,
                                  progress=progress)
            if bar is not None and task is not None:
                bar.update(task, total=max(outcome.rows_total, 1),
                           completed=max(outcome.rows_total, 1))
            outcomes.append(outcome)
    return outcomes


def _summary_table(outcomes: list) -> Table:
    table = Table("file", "plant", "status", "new", "unchanged", "revised", "rejected",
                  "flagged cells", "s", "rows/s", title="ingestion summary")
    styles = {"loaded": "green", "already": "dim", "quarantined": "red", "empty": "yellow",
              "skipped": "yellow"}
    for o in outcomes:
        rate = o.rows_total / o.seconds if o.seconds > 0 and o.rows_total else 0
        table.add_row(o.path.name, o.plant_code or "-", Text(o.status,
                      style=styles.get(o.status, "")), f"{o.rows_new:,}",
                      f"{o.rows_unchanged:,}", f"{o.rows_revised:,}", f"{o.rows_rejected:,}",
                      f"{o.cells_flagged:,}", f"{o.seconds:.2f}", f"{rate:,.0f}")
    return table


def _print_outcomes(outcomes: list, *, max_problems: int = 8) -> None:
    for o in outcomes:
        line = f"{o.path}: {o.status}: {o.message}"
        err.print(Text(line, style="red" if o.status == "quarantined" else ""))
        for problem in o.problems[:max_problems]:
            err.print(Text(f"    {problem}", style="dim"))
        if len(o.problems) > max_problems:
            err.print(Text(f"    ... {len(o.problems) - max_problems} more in "
                           f"`hydrodrift files show {o.file_id}`", style="dim"))
    out.print(_summary_table(outcomes))


@app.command("ingest")
def ingest(
    paths: Annotated[list[Path], typer.Argument(help="Export files, or drop folders.")],
    plant: Annotated[str | None, typer.Option(help="Plant code; default: recognised "
                                              "from the file's tags.")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress.")] = False,
) -> None:
    """Load SCADA export files into the store (idempotent; one transaction per file)."""
    settings = get_settings()
    engine = _engine(settings)
    outcomes = run_ingest(engine, _expand(paths, settings), settings, plant_code=plant,
                          show_progress=not quiet)
    _print_outcomes(outcomes)
    if any(o.status == "quarantined" for o in outcomes):
        raise typer.Exit(1)


@app.command("pull")
def pull() -> None:
    """Poll every plant's configured sources once (drop folders, HTTP) and ingest what is new."""
    from ingest.pipeline import FileOutcome
    from ingest.registry import stored_plant_file
    from ingest.sources import DropFolder, PullError, pull_http
    from store.engine import session_scope
    from store.models import Plant

    settings = get_settings()
    engine = _engine(settings)
    with session_scope(engine) as session:
        plants = [(p.code, stored_plant_file(session, p)[0])
                  for p in session.scalars(select(Plant).order_by(Plant.code))]
    outcomes: list[FileOutcome] = []
    for code, plant_file in plants:
        for source in plant_file.sources:
            if source.kind == "folder" and source.path:
                try:
                    scan = DropFolder(Path(source.path), pattern=source.pattern,
                                      stable_seconds=settings.stable_seconds,
                                      marker_suffix=settings.marker_suffix).scan()
                except FileNotFoundError as exc:
                    err.print(Text(f"plant {code}: {exc}", style="red"))
                    continue
                for waiting, why in scan.waiting.items():
                    err.print(f"{waiting}: skipped, {why}")
                outcomes += run_ingest(engine, scan.ready, settings, plant_code=code)
            elif source.kind == "http" and source.url:
                try:
                    path = pull_http(source.url, settings.data_dir / "pulled" / code,
                                     retries=settings.http_retries,
                                     backoff_s=settings.http_backoff_s)
                except PullError as exc:
                    err.print(Text(f"plant {code}: {exc}", style="red"))
                    continue
                outcomes += run_ingest(engine, [path], settings, plant_code=code)
    if not outcomes:
        out.print("no source had a complete new file")
        return
    _print_outcomes(outcomes)


# --------------------------------------------------------------------------- files
@files_app.command("list")
def files_list(
    status: Annotated[str | None, typer.Option(help="loaded, empty or quarantined")] = None,
    limit: Annotated[int, typer.Option(min=1)] = 50,
) -> None:
    """The most recent ingested files."""
    from store.engine import session_scope
    from store.models import IngestedFile

    engine = _engine(get_settings())
    table = Table("id", "file", "status", "rows", "new", "unchanged", "revised", "rejected",
                  "flagged", "first (UTC)", "last (UTC)")
    with session_scope(engine) as session:
        query = select(IngestedFile).order_by(IngestedFile.id.desc()).limit(limit)
        if status:
            query = query.where(IngestedFile.status == status)
        for f in session.scalars(query):
            table.add_row(str(f.id), f.filename, f.status, f"{f.rows_total:,}",
                          f"{f.rows_new:,}", f"{f.rows_unchanged:,}", f"{f.rows_revised:,}",
                          f"{f.rows_rejected:,}", f"{f.rows_flagged:,}",
                          f"{f.first_ts:%Y-%m-%d %H:%M}" if f.first_ts else "-",
                          f"{f.last_ts:%Y-%m-%d %H:%M}" if f.last_ts else "-")
    out.print(table)


@files_app.command("show")
def files_show(file_id: Annotated[int, typer.Argument(help="File id from `files list`.")]) -> None:
    """One file's record and its full problem report."""
    from store.engine import session_scope
    from store.models import IngestedFile, QuarantinedFile

    engine = _engine(get_settings())
    with session_scope(engine) as session:
        f = session.get(IngestedFile, file_id)
        if f is None:
            err.print(f"no ingested file with id {file_id}")
            raise typer.Exit(1)
        out.print(f"file #{f.id} {f.filename} ({f.size_bytes:,} bytes, sha256 {f.sha256})")
        out.print(f"source {f.source}; status {f.status}; code {f.code_version}")
        out.print(f"rows {f.rows_total:,}: {f.rows_new:,} new, {f.rows_unchanged:,} unchanged, "
                  f"{f.rows_revised:,} revised, {f.rows_rejected:,} rejected; "
                  f"{f.rows_flagged:,} flagged cells")
        q = session.scalar(select(QuarantinedFile).where(QuarantinedFile.ingested_file_id == f.id))
        if q is not None:
            out.print(Text(f"quarantined: {q.reason}\ncopy kept at {q.stored_path}", style="red"))
        for p in (f.report or {}).get("problems", []):
            where = f.filename + (f":{p['line']}" if p.get("line") else "")
            if p.get("column"):
                where += f", column {p['column']!r}"
            out.print(f"{where}: {p['severity']}: {p['message']}", highlight=False)
        for key, n in sorted((f.report or {}).get("counts", {}).items()):
            out.print(f"  {key}: {n}", highlight=False)


# --------------------------------------------------------------------------- demo
@app.command("demo")
def demo(
    root: Annotated[Path | None, typer.Option(help="Where to write the demo fleet; "
                                              "default: <data_dir>/demo.")] = None,
    days: Annotated[int, typer.Option(min=7, max=731, help="Days of plant data.")] = 365,
    seed: Annotated[int, typer.Option(help="Random seed of the scenario.")] = 20261201,
) -> None:
    """Generate the fictional demo fleet, ingest a year of exports, compute and report."""
    from hydrodrift.demofleet import generate_demo
    from ingest.registry import import_plant_file

    settings = get_settings()
    root = root or settings.data_dir / "demo"
    t0 = time.perf_counter()
    err.print(f"writing the demo fleet ({days} days of 10-minute data) to {root} ...")
    manifest = generate_demo(root, seed=seed, days=days)
    t_gen = time.perf_counter() - t0
    err.print(f"  {len(manifest.export_files)} export files, {manifest.rows_written:,} rows "
              f"in {t_gen:.1f} s; ground truth in {manifest.truth_file}")
    engine = _engine(settings)
    for plant_path in manifest.plant_files:
        out.print(f"{plant_path.name}: {import_plant_file(engine, plant_path).summary()}")
    t1 = time.perf_counter()
    outcomes = run_ingest(engine, manifest.export_files, settings)
    t_ingest = time.perf_counter() - t1
    _print_outcomes(outcomes, max_problems=3)
    from store.engine import session_scope
    from store.models import Sample

    with session_scope(engine) as session:
        stored = session.scalar(select(func.count()).select_from(Sample))
    total = sum(o.rows_total for o in outcomes)
    out.print(
        f"demo: {len(outcomes)} files, {total:,} data rows read, {stored:,} unit-samples in "
        f"the store, {sum(o.cells_flagged for o in outcomes):,} flagged cells, "
        f"{sum(o.rows_rejected for o in outcomes):,} rejected rows, "
        f"{sum(o.status == 'quarantined' for o in outcomes)} quarantined; generated in "
        f"{t_gen:.1f} s, ingested in {t_ingest:.1f} s, total {time.perf_counter() - t0:.1f} s"
    )
    out.print(f"database: {engine.url.render_as_string(hide_password=True)}")
    from jobs.compute import compute
    from jobs.report import weekly_report

    t2 = time.perf_counter()
    summary = compute(engine, settings, progress=lambda line: err.print(line))
    out.print(f"{summary.line()} (compute {time.perf_counter() - t2:.1f} s)")
    for problem in summary.problems:
        err.print(f"error: {problem}")
    with session_scope(engine) as session:
        week, frame = weekly_report(session)
    out.print(report_table(week, frame))
    with session_scope(engine) as session:
        open_rows = _episodes(session, include_closed=False)
        out.print(alerts_table(open_rows) if open_rows else "no open alert episodes")
    out.print("The demo's ground truth (truth.json): LBD U3 loses 1.5 points a year, GLF MG2 "
              "lost 2.0 points on 2026-06-01; every other unit is healthy. "
              "`hydrodrift report --week 2026-W30` shows another week.")
    out.print(Text(SAFETY_NOTE, style="italic"))


# --------------------------------------------------------------------------- compute, report
@app.command("compute")
def compute_cmd(
    plant: Annotated[str | None, typer.Option(help="Only this plant's files.")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Only the summary.")] = False,
) -> None:
    """Compute efficiency windows and weekly drift for samples not yet computed."""
    from jobs.compute import compute

    settings = get_settings()
    engine = _engine(settings)
    try:
        summary = compute(engine, settings, plant_code=plant,
                          progress=None if quiet else (lambda line: err.print(line)))
    except KeyError as exc:
        err.print(f"error: {exc.args[0]}")
        raise typer.Exit(2) from None
    out.print(summary.line())
    for problem in summary.problems:
        err.print(f"error: {problem}")
    if summary.problems:
        raise typer.Exit(1)


def _fmt(value: float | None, spec: str) -> str:
    return "-" if value is None or value != value else format(value, spec)


def _present(value: object) -> bool:
    return value is not None and value == value and value != ""  # NaN != NaN


def report_table(week: str, frame) -> Table:
    """The weekly report as a rich table (points, MWh, money)."""
    currency = frame["currency"].iloc[0] if len(frame) else ""
    table = Table(title=f"Weekly efficiency drift, {week} (ISO week, plant time), "
                  "sorted by lost energy", title_justify="left")
    for name, justify in (("plant", "left"), ("unit", "left"), ("runner", "left"),
                          ("steady h", "right"), ("deviation pt (90% CI)", "right"),
                          ("trend pt/yr", "right"), ("last change point", "left"),
                          ("lost MWh (band)", "right"), (f"lost {currency}", "right"),
                          ("cum. MWh", "right"), ("ref", "right")):
        table.add_column(name, justify=justify)
    for r in frame.itertuples(index=False):
        deviation = (f"{_fmt(r.deviation_pt, '+.2f')} ({_fmt(r.deviation_low_pt, '+.2f')} .. "
                     f"{_fmt(r.deviation_high_pt, '+.2f')})") if _present(r.deviation_pt) else "-"
        change = (f"{r.change_point_week} ({_fmt(r.change_point_pt, '+.2f')} pt)"
                  if _present(r.change_point_week) else "-")
        lost = (f"{_fmt(r.lost_mwh, ',.1f')} ({_fmt(r.lost_mwh_low, ',.1f')} .. "
                f"{_fmt(r.lost_mwh_high, ',.1f')})")
        table.add_row(r.plant, r.unit, r.runner, _fmt(r.steady_hours, ".1f"), deviation,
                      _fmt(r.trend_pt_per_year, "+.2f"), change, lost,
                      _fmt(r.lost_money, ",.0f"), _fmt(r.cumulative_lost_mwh, ",.0f"),
                      f"v{r.reference_version}")
    return table


@app.command("report")
def report_cmd(
    week: Annotated[str | None, typer.Option(
        help="ISO week YYYY-Www; default: the latest complete week in the store.")] = None,
    fmt: Annotated[str, typer.Option("--format", help="table, csv or json.")] = "table",
) -> None:
    """Print the fleet's weekly drift table, sorted by lost energy."""
    from jobs.report import ReportError, render_report, weekly_report
    from store.engine import session_scope

    if fmt not in ("table", "csv", "json"):
        err.print(f"error: --format {fmt!r}: expected table, csv or json")
        raise typer.Exit(2)
    settings = get_settings()
    engine = _engine(settings)
    try:
        with session_scope(engine) as session:
            week, frame = weekly_report(session, week)
    except ReportError as exc:
        err.print(f"error: {exc}")
        raise typer.Exit(1) from None
    if fmt == "table":
        out.print(report_table(week, frame))
        out.print("Deviation: index efficiency minus reference at the same head and power, "
                  "median over the week's steady windows; lost energy: the week's generation "
                  "times the median relative loss.")
        out.print(Text(SAFETY_NOTE + " Efficiency figures are index-test estimates: confirm "
                       "a refurbishment decision with an absolute test.", style="italic"))
    else:
        sys.stdout.write(render_report(week, frame, fmt, caution=SAFETY_NOTE))


def _utc_day(text: str | None, option: str):
    """``YYYY-MM-DD`` as the UTC midnight starting that day; exit 2 naming the option."""
    from datetime import UTC, datetime

    if text is None:
        return None
    try:
        return datetime.strptime(text, "%Y-%m-%d").replace(tzinfo=UTC)
    except ValueError:
        err.print(f"error: --{option} {text!r}: expected YYYY-MM-DD")
        raise typer.Exit(2) from None


@app.command("cam")
def cam_cmd(
    plant: Annotated[str, typer.Argument(help="Plant code.")],
    unit: Annotated[str, typer.Argument(help="Kaplan unit code.")],
    since: Annotated[str | None, typer.Option(help="First day (YYYY-MM-DD, UTC).")] = None,
    until: Annotated[str | None, typer.Option(help="Day after the last (YYYY-MM-DD, UTC).")
                     ] = None,
) -> None:
    """Kaplan cam check: best blade angle per opening and head band against the cam."""

    import numpy as np

    from jobs.cam_review import CamReviewError, unit_cam_check
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    try:
        with session_scope(engine) as session:
            result, _ = unit_cam_check(session, plant, unit, since=_utc_day(since, "since"),
                                       until=_utc_day(until, "until"))
    except CamReviewError as exc:
        err.print(f"error: {exc}")
        raise typer.Exit(1) from None
    cells = result.cells
    table = Table(title=f"Cam check {plant}/{unit}: best blade angle against the installed "
                  "cam, per opening and head band", title_justify="left")
    for name in ("opening", "head m", "windows", "installed deg", "best deg", "change deg",
                 "gain pt", "energy gain MWh", "note"):
        table.add_column(name, justify="left" if name in ("opening", "note") else "right")
    for r in cells.itertuples(index=False):
        if not r.accepted and r.windows == 0:
            continue
        ok = bool(r.accepted)
        table.add_row(
            f"{r.opening_low:.1f}-{r.opening_high:.1f}", f"{r.head_low:.1f}-{r.head_high:.1f}",
            str(int(r.windows)),
            f"{np.degrees(r.installed_blade_angle):+.2f}" if ok else "-",
            f"{np.degrees(r.best_blade_angle):+.2f}" if ok else "-",
            f"{np.degrees(r.angle_change):+.2f}" if ok else "-",
            f"{100 * r.efficiency_gain:.2f}" if ok else "-",
            f"{r.energy_gain / 3.6e9:,.1f}" if ok else "-",
            ("optimum at the edge of the observed angles" if ok and r.best_at_edge
             else ("" if ok else str(r.reason))))
    out.print(table)
    t = result.totals
    out.print(f"{int(t['cells_accepted'])} of {int(t['cells'])} cells checked, "
              f"{int(t['windows_used']):,} windows; a re-tuned cam would have gained "
              f"{t['energy_gain'] / 3.6e9:,.1f} MWh ({100 * t['relative_gain']:.2f} % of the "
              f"energy in the checked cells).")
    out.print(Text("Advice only: a cam is re-tuned by qualified staff following the governor "
                   "manufacturer's procedure, after confirming the result with an off-cam "
                   "test. " + SAFETY_NOTE, style="italic"))


@app.command("plot")
def plot_cmd(
    plant: Annotated[str, typer.Argument(help="Plant code.")],
    unit: Annotated[str, typer.Argument(help="Unit code.")],
    output: Annotated[Path | None, typer.Option("--output", "-o", help="PNG or PDF file; "
                                                "default <data_dir>/plots/PLANT_UNIT.png")
                      ] = None,
) -> None:
    """Draw a unit's weekly drift and its reference curve with recent steady windows."""
    from hydrodrift.plots import PlotError, unit_drift_figure
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    target = output or settings.data_dir / "plots" / f"{plant}_{unit}.png"
    try:
        with session_scope(engine) as session:
            written = unit_drift_figure(session, plant, unit, target)
    except PlotError as exc:
        err.print(f"error: {exc}")
        raise typer.Exit(1) from None
    out.print(f"wrote {written}")


def alerts_table(rows: list) -> Table:
    """Alert episodes as a rich table."""
    table = Table(title="Alert episodes", title_justify="left")
    for name in ("id", "plant", "unit", "signature", "severity", "status", "opened (UTC)",
                 "last window (UTC)", "flagged h", "acknowledged"):
        table.add_column(name, justify="right" if name in ("id", "flagged h") else "left")
    for episode, plant, unit in rows:
        ack = (f"{episode.acknowledged_by} {episode.acknowledged_at:%Y-%m-%d %H:%M}"
               if episode.acknowledged_by else "-")
        table.add_row(str(episode.id), plant, unit, episode.signature, episode.severity,
                      episode.status, f"{episode.opened_at:%Y-%m-%d %H:%M}",
                      f"{episode.last_window:%Y-%m-%d %H:%M}",
                      f"{(episode.summary or {}).get('flagged_hours', 0):.1f}", ack)
    return table


def _episodes(session, include_closed: bool) -> list:
    from store.models import AlertEpisode, Plant, Unit

    query = (select(AlertEpisode, Plant.code, Unit.code)
             .join(Unit, Unit.id == AlertEpisode.unit_id).join(Plant, Plant.id == Unit.plant_id)
             .order_by(AlertEpisode.opened_at.desc()))
    if not include_closed:
        query = query.where(AlertEpisode.status.in_(("open", "acknowledged")))
    return list(session.execute(query).all())


@alerts_app.callback()
def alerts_list(
    ctx: typer.Context,
    all_: Annotated[bool, typer.Option("--all", help="Also closed and resolved ones.")] = False,
) -> None:
    """List the open alert episodes (newest first)."""
    if ctx.invoked_subcommand is not None:
        return
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    with session_scope(engine) as session:
        rows = _episodes(session, all_)
        if not rows:
            out.print("no open alert episodes" if not all_ else "no alert episodes")
        else:
            out.print(alerts_table(rows))
    out.print(Text("Signatures call for inspection by qualified staff. " + SAFETY_NOTE,
                   style="italic"))


def _set_status(episode_id: int, action: str, who: str, note: str | None) -> None:
    from jobs.episodes import set_status
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    try:
        with session_scope(engine) as session:
            episode = set_status(session, settings, episode_id, action=action, who=who,
                                 note=note)
            out.print(f"episode {episode.id}: {episode.status} by {who}")
    except (KeyError, ValueError) as exc:
        err.print(f"error: {exc.args[0]}")
        raise typer.Exit(1) from None


@alerts_app.command("ack")
def alerts_ack(
    episode_id: Annotated[int, typer.Argument(help="Episode id from `hydrodrift alerts`.")],
    by: Annotated[str, typer.Option(help="Who acknowledges.")],
    note: Annotated[str | None, typer.Option(help="A note kept with the episode.")] = None,
) -> None:
    """Acknowledge an episode (recorded with who and when; receivers are told)."""
    _set_status(episode_id, "ack", by, note)


@alerts_app.command("resolve")
def alerts_resolve(
    episode_id: Annotated[int, typer.Argument(help="Episode id from `hydrodrift alerts`.")],
    by: Annotated[str, typer.Option(help="Who resolves.")],
    note: Annotated[str | None, typer.Option(help="What was found or done.")] = None,
) -> None:
    """Resolve an episode (recorded with who and when; receivers are told)."""
    _set_status(episode_id, "resolve", by, note)


@app.command("dispatch")
def dispatch_cmd(
    once: Annotated[bool, typer.Option("--once", help="Deliver what is due, then stop.")
                    ] = False,
) -> None:
    """Deliver alert messages from the outbox (webhooks, MQTT), retrying with backoff."""
    import signal
    import threading

    from jobs.outbox import dispatch_forever, dispatch_once

    settings = get_settings()
    engine = _engine(settings)
    if once:
        out.print(str(dispatch_once(engine, settings)))
        return
    stop = threading.Event()
    signal.signal(signal.SIGTERM, lambda *_: stop.set())
    err.print("dispatching (Ctrl-C or SIGTERM stops) ...")
    try:
        dispatch_forever(engine, settings, stop=stop)
    except KeyboardInterrupt:
        stop.set()


@alerts_app.command("dead")
def alerts_dead() -> None:
    """List dead letters: messages that could not be delivered after every attempt."""
    from jobs.outbox import dead_letters
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    with session_scope(engine) as session:
        rows = dead_letters(session)
        table = Table(title="Dead letters", title_justify="left")
        for name in ("id", "event", "channel", "target", "attempts", "last error"):
            table.add_column(name)
        for m in rows:
            table.add_row(str(m.id), m.event, m.channel, m.target, str(m.attempts),
                          (m.last_error or "")[:80])
        out.print(table if rows else "no dead letters")


@alerts_app.command("resend")
def alerts_resend(message_id: Annotated[int, typer.Argument(help="Dead letter id.")]) -> None:
    """Send a dead letter again (same idempotency key)."""
    from jobs.outbox import resend
    from store.engine import session_scope

    settings = get_settings()
    engine = _engine(settings)
    try:
        with session_scope(engine) as session:
            message = resend(session, message_id)
            out.print(f"message {message.id}: pending again ({message.target})")
    except (KeyError, ValueError) as exc:
        err.print(f"error: {exc.args[0] if exc.args else exc}")
        raise typer.Exit(1) from None


@detector_app.command("train")
def detector_train(
    plant: Annotated[str, typer.Argument(help="Plant code.")],
    unit: Annotated[str, typer.Argument(help="Unit code.")],
    since: Annotated[str, typer.Option("--from", help="Baseline start, YYYY-MM-DD (UTC).")],
    until: Annotated[str, typer.Option("--to", help="Baseline end (exclusive), YYYY-MM-DD.")],
) -> None:
    """Train a new detector version on a declared healthy period; past scores stay."""

    from jobs.detect import DetectorError, reconcile_unit, score_windows, train_detector
    from store.engine import session_scope
    from store.models import Plant, Unit

    start = _utc_day(since, "from")
    end = _utc_day(until, "to")
    settings = get_settings()
    engine = _engine(settings)
    try:
        with session_scope(engine) as session:
            row = session.execute(select(Plant, Unit).join(Unit).where(
                Plant.code == plant, Unit.code == unit)).first()
            if row is None:
                raise DetectorError(f"no unit {plant}/{unit} in the store")
            p, u = row
            model = train_detector(session, p, u, since=start, until=end)
            scored = score_windows(session, p, u, model, since=start)
            reconcile_unit(session, settings, p, u, model)
            out.print(f"{plant}/{unit}: detector v{model.version} trained on "
                      f"{model.n_windows:,} windows ({since} .. {until}); "
                      f"{int(scored['flagged'].sum()) if len(scored) else 0:,} of "
                      f"{len(scored):,} windows flagged since {since}")
    except DetectorError as exc:
        err.print(f"error: {exc}")
        raise typer.Exit(1) from None


def main(argv: Sequence[str] | None = None) -> None:
    """Entry point of the ``hydrodrift`` console script."""
    try:
        app(args=list(argv) if argv is not None else None, prog_name="hydrodrift")
    except KeyboardInterrupt:
        err.print("interrupted; every file is all-or-nothing, so rerun to complete")
        sys.exit(130)


if __name__ == "__main__":
    main()
