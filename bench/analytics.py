"""Analytics benchmark: the efficiency path against bare numpy, and incremental compute.

Run ``python bench/analytics.py`` (10,000,000 samples, one year of history) or
``python bench/analytics.py --quick`` (1,000,000 samples, 35 days of history). Each part
runs in a child process of its own, so that each peak RSS belongs to that part.

Part 1, pure analytics (no database)
    Synthesises 1-second samples of two fictional Francis units of the demo plant ``GLF``
    (``MG1``, ``MG2``: their plant-file specs and their as-built hill chart from
    :func:`hydrodrift.demofleet.physics.unit_physics`): hourly-scale set-point steps followed
    by the governor, stops and starts, reservoir and tailwater levels, water temperature,
    and a Winter-Kennedy differential pressure inverted from the flow that the hill chart
    gives at each sample's power and head (:func:`hydrodrift.demofleet.hydraulics.
    operating_point`), with the demo fleet's sensor noise, a few lost samples and flagged
    cells. Then times, best of ``--repeats``, on the same frames in the same process:

    ``path``  :func:`jobs.efficiency.unit_windows` per unit: steady windows, window means,
              Winter-Kennedy flow, net head, IAPWS-IF97 density, generator efficiency, index
              efficiency, reference efficiency from the hill chart, deviation and loss with
              the epoch's index constant (fixed beforehand from a baseline, untimed);
    ``bare``  baseline: ``eta = (P/eta_gen) / (rho g k dp^n H)`` per sample, with
              ``eta_gen`` from ``np.interp`` of the generator curve, ``H`` from the levels
              less ``k_p Q^2``, and ``rho`` one number per unit.

Part 2, store (SQLite, and PostgreSQL when reachable)
    Generates the demo fleet for ``history + 1`` days (:func:`hydrodrift.demofleet.
    generate_demo`) and splits every export at ``start + history`` days (UTC) into the
    history and the last day. One database ingests the history, computes it (untimed for
    the ratio, reported), ingests the last day and times ``jobs.compute.compute``; a fresh
    empty database ingests only the last day and times the same call in three states:
    fresh (its first run also calibrates the references), references in place, and
    references with the history database's index constants in place (the same state as the
    history side but for the history: the JSON's ``incremental_ratio``). Each timed run is
    repeated after deleting the run's ``computed_files`` marks, which makes the next run
    redo exactly the same work (see ``jobs.compute``).

The last line of output is one JSON object (keys in ``bench/README.md``).
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import os
import pstats
import resource
import secrets
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from collections import deque
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np

# Run as ``python bench/analytics.py`` this file's folder comes first on sys.path, and this
# script's own name would shadow the ``analytics`` package: drop the folder, add the repo.
_BENCH_DIR = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _BENCH_DIR]
if str(_BENCH_DIR.parent) not in sys.path:
    sys.path.insert(0, str(_BENCH_DIR.parent))

DEFAULT_PG_URL = os.environ.get(
    "HYDRODRIFT_BENCH_PG_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test"
)
FULL_SAMPLES, QUICK_SAMPLES = 10_000_000, 1_000_000
FULL_HISTORY_DAYS, QUICK_HISTORY_DAYS = 365, 35
SEED = 20260601

# --------------------------------------------------------------------------- synthesis
# Everything below is INVENTED for the benchmark (plausible, not engineering data).
PLANT = "GLF"
UNITS = ("MG1", "MG2")
START_S = 1_764_547_200  # 2025-12-01T00:00:00Z, the demo fleet's start
#: A set point is held 15 min to 2 h (uniform), as a dispatcher's schedule steps would be.
SETPOINT_HOLD_S = (900, 7200)
#: Share of set points that stop the unit.
STOP_PROBABILITY = 0.12
#: Set points as a fraction of rated power: the demo Francis units' 40 % minimum load (rough
#: zone avoided, see hydrodrift.demofleet.scenario) up to rating.
LOAD_RANGE = (0.40, 1.00)
#: Governor / load-controller time constant [s] of the response to a set-point step.
GOVERNOR_TAU_S = 40.0
#: Below this fraction of rated power a starting or stopping unit reads 0 (not synchronised);
#: it also keeps every online sample inside the hill chart's load grid.
SYNC_LOAD = 0.08
#: Reservoir: mean level, drawdown [m/day], AR(1) wander (sigma [m], time scale [s]).
HEADWATER = (1986.5, -0.10, 0.05, 3600.0)
#: Tailwater rating 1478 + 0.09 Q^0.6 [m] (the demo plant's invented rating), lag [s].
TAILWATER = (1478.0, 0.09, 0.6, 600.0)
#: Water temperature: mean [degC], daily amplitude [K], AR(1) sigma [K] and time scale [s].
WATER = (5.5, 0.3, 0.2, 21_600.0)
#: Lost samples and flagged (NaN) cells, as fractions (invented: rare, as exports have them;
#: a flagged cell reaches the analytics as NaN, see jobs.unit_samples).
DROP_FRACTION, NAN_FRACTION = 1e-4, 1e-5
#: Planted loss: unit -> efficiency points lost from this fraction of the span on.
PLANTED_STEP = {"MG2": (1.0, 0.6)}
#: Baseline of the index constant: the first 28 days (the service's default), at most this
#: fraction of the span.
BASELINE_DAYS, BASELINE_MAX_FRACTION = 28.0, 0.4


def _peak_rss_mb() -> float:
    """This process's peak resident set size [MB] (``VmHWM``; see bench/ingest.py)."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _rss_mb() -> float:
    """This process's current resident set size [MB] (``VmRSS``); NaN off Linux."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return float("nan")


def _reset_peak_rss() -> bool:
    """Reset ``VmHWM`` to the current RSS (Linux >= 4.0: ``5`` to ``/proc/self/clear_refs``).

    Lets one child report the peak of each phase (data held plus that phase's temporaries)
    instead of the peak of the set-up that came before. False where unsupported: the figure
    then includes the set-up, and the JSON says so.
    """
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as handle:
            handle.write("5")
    except OSError:
        return False
    return True


def _trim_heap() -> None:
    """Hand freed heap memory back to the OS (glibc ``malloc_trim``), so that the phases'
    peaks start from the data held, not from what the synthesis left in the allocator."""
    try:
        import ctypes

        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _say(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def _lag(u: np.ndarray, tau_s: float) -> np.ndarray:
    """First-order lag of a 1-s series, starting settled."""
    from scipy.signal import lfilter

    alpha = 1.0 - np.exp(-1.0 / tau_s)
    out, _ = lfilter([alpha], [1.0, -(1.0 - alpha)], u, zi=[(1.0 - alpha) * u[0]])
    return out


def _setpoint_power(rng: np.random.Generator, n: int, rated: float) -> np.ndarray:
    """Generator power [W]: held set points, stops, the governor's lag."""
    count = n // SETPOINT_HOLD_S[0] + 2
    hold = rng.integers(SETPOINT_HOLD_S[0], SETPOINT_HOLD_S[1] + 1, size=count)
    level = rng.uniform(*LOAD_RANGE, size=count) * rated
    level[rng.random(count) < STOP_PROBABILITY] = 0.0
    power = _lag(np.repeat(level, hold)[:n], GOVERNOR_TAU_S)
    power[power < SYNC_LOAD * rated] = 0.0
    return power


def _measured(signal: str, clean: np.ndarray, rng: np.random.Generator,
              online: np.ndarray, rated: float) -> np.ndarray:
    """``clean`` plus the demo fleet's sensor noise (hydrodrift.demofleet.dispatch)."""
    from hydrodrift.demofleet.dispatch import POWER_NOISE_OF_RATED, SENSOR_NOISE, SPEED_NOISE

    z = rng.standard_normal(clean.size)
    if signal == "active_power":
        return np.where(online, clean + z * POWER_NOISE_OF_RATED * rated, 0.0)
    if signal == "rotational_speed":
        return clean * (1.0 + SPEED_NOISE * z)
    if signal == "gate_opening":
        return np.where(online, np.clip(clean + SENSOR_NOISE[signal][1] * z, 0.0, 1.0), 0.0)
    relative, absolute = SENSOR_NOISE[signal]
    return clean + z * np.hypot(relative * clean, absolute)


def synthesise(n_per_unit: int, plant: Any, seed: int = SEED) -> dict[str, Any]:
    """1-second sample frames of the bench units, as ``read_unit_samples`` returns them.

    Returns ``{unit: DataFrame}`` with ``ts_us`` (int64 UTC microseconds) and the SI
    signal columns of :data:`jobs.unit_samples.COMPUTE_SIGNALS` (NaN where not exported).
    """
    import pandas as pd

    from analytics.site import atmospheric_pressure, local_gravity
    from analytics.water import density
    from hydrodrift.demofleet.dispatch import ar1
    from hydrodrift.demofleet.hydraulics import operating_point, wk_differential_pressure
    from hydrodrift.demofleet.physics import unit_physics

    rng = np.random.default_rng(seed)
    n = n_per_unit
    ts = START_S + np.arange(n, dtype=np.int64)
    days = np.arange(n) / 86_400.0
    g = float(local_gravity(plant.plant.latitude, plant.plant.elevation))
    p_atm = float(atmospheric_pressure(plant.plant.elevation))
    mean, drawdown, sigma, scale = HEADWATER
    headwater = mean + drawdown * days + ar1(rng, n, np.exp(-1.0 / scale), sigma)
    mean, daily, sigma, scale = WATER
    water_k = (273.15 + mean + daily * np.sin(2 * np.pi * days)
               + ar1(rng, n, np.exp(-1.0 / scale), sigma))
    specs = {code: plant.unit(code) for code in UNITS}
    power = {code: _setpoint_power(rng, n, specs[code].rated_power) for code in UNITS}
    base, coefficient, exponent, lag_s = TAILWATER
    flow_estimate = sum(power.values()) / (1000.0 * g * 500.0 * 0.9)
    tailwater = (base + coefficient * _lag(flow_estimate, lag_s) ** exponent
                 + ar1(rng, n, np.exp(-1.0 / 60.0), 0.005))
    gross = headwater - tailwater
    rho = np.asarray(density(water_k, p_atm + 0.5 * 1000.0 * g * gross), dtype=float)
    anyone = np.ones(n, dtype=bool)
    # the levels are plant tags: both units read the same measured values
    levels = {"headwater_level": _measured("headwater_level", headwater, rng, anyone, 0.0),
              "tailwater_level": _measured("tailwater_level", tailwater, rng, anyone, 0.0)}
    frames = {}
    for code in UNITS:
        spec = specs[code]
        physics = unit_physics(PLANT, code)
        points, at = PLANTED_STEP.get(code, (0.0, 1.0))
        degradation = np.where(days >= at * days[-1], points / 100.0, 0.0)
        op = operating_point(spec, physics, power[code], gross, degradation, rho=rho, g=g)
        on, rated = op.online, spec.rated_power
        columns = {
            "active_power": _measured("active_power", op.generator_power, rng, on, rated),
            "headwater_level": levels["headwater_level"].copy(),
            "tailwater_level": levels["tailwater_level"].copy(),
            "wk_differential_pressure": _measured(
                "wk_differential_pressure", wk_differential_pressure(spec, op.flow), rng, on,
                rated),
            "flow_rate": (_measured("flow_rate", op.flow, rng, on, rated) if code == "MG1"
                          else np.full(n, np.nan)),  # MG1 has a flow meter, MG2 has not
            "gate_opening": _measured("gate_opening", op.opening, rng, on, rated),
            "blade_angle": np.full(n, np.nan),  # a Francis unit exports none
            "rotational_speed": _measured("rotational_speed",
                                          np.where(on, spec.rated_speed, 0.0), rng, on, rated),
            "water_temperature": _measured("water_temperature", water_k, rng, on, rated),
        }
        for values in columns.values():
            if not np.isnan(values).all():
                values[rng.random(n) < NAN_FRACTION] = np.nan
        keep = rng.random(n) >= DROP_FRACTION
        frame = pd.DataFrame({"ts_us": ts[keep] * 1_000_000,
                              **{k: v[keep] for k, v in columns.items()}})
        frames[code] = frame
        del op, columns
    return frames


# --------------------------------------------------------------------------- part 1


def _pure_context(plant: Any) -> dict[str, Any]:
    from analytics.site import local_gravity
    from hydrodrift.demofleet.physics import unit_physics
    from jobs.efficiency import generator_curve, unit_tolerances

    ctx: dict[str, Any] = {"gravity": float(local_gravity(plant.plant.latitude,
                                                           plant.plant.elevation)),
                           "elevation": float(plant.plant.elevation), "units": {}}
    for code in UNITS:
        spec = plant.unit(code)
        curve_p, curve_eta = generator_curve(spec)
        ctx["units"][code] = {"spec": spec, "chart": unit_physics(PLANT, code).chart,
                              "tolerances": unit_tolerances(spec), "curve_p": curve_p,
                              "curve_eta": curve_eta, "constant": None, "rho": None}
    return ctx


def run_path(frames: dict[str, Any], ctx: dict[str, Any]) -> dict[str, Any]:
    """The full path, per unit: :func:`jobs.efficiency.unit_windows`."""
    from jobs.efficiency import unit_windows

    out = {}
    for code, frame in frames.items():
        u = ctx["units"][code]
        out[code] = unit_windows(frame, spec=u["spec"], plant_elevation=ctx["elevation"],
                                 gravity=ctx["gravity"], chart=u["chart"],
                                 tolerances=u["tolerances"], index_constant=u["constant"],
                                 flow_basis="winter_kennedy")
    return out


def run_bare(frames: dict[str, Any], ctx: dict[str, Any]) -> dict[str, np.ndarray]:
    """Baseline: ``eta = (P/eta_gen) / (rho g k dp^n H)`` per sample, bare numpy.

    The index-test efficiency with the Winter-Kennedy flow ``Q = k dp^n`` (IEC 60041:1991,
    clause 15; ASME PTC 18-2002, 4G), ``H = z_hw - z_tw - k_p Q^2`` [m] and one density
    [kg/m3] per unit: the formula alone, no windows, no reference, no checks.
    """
    g = ctx["gravity"]
    out = {}
    for code, frame in frames.items():
        u = ctx["units"][code]
        spec = u["spec"]
        p = frame["active_power"].to_numpy()
        dp = frame["wk_differential_pressure"].to_numpy()
        eta_gen = np.interp(p, u["curve_p"], u["curve_eta"])
        with np.errstate(invalid="ignore", divide="ignore"):
            q = spec.winter_kennedy_coefficient * dp ** spec.winter_kennedy_exponent
            head = (frame["headwater_level"].to_numpy() - frame["tailwater_level"].to_numpy()
                    - spec.penstock_loss_coefficient * q * q)
            out[code] = (p / eta_gen) / (u["rho"] * g * q * head)
    return out


def _fix_constants(frames: dict[str, Any], ctx: dict[str, Any]) -> dict[str, Any]:
    """Untimed: the index constant from the baseline, and each unit's scalar density."""
    from analytics.index_test import index_constant
    from analytics.site import atmospheric_pressure
    from analytics.water import density

    results = run_path(frames, ctx)
    detail = {}
    for code, res in results.items():
        f = res.frame
        span = float(f["window_start"].iloc[-1] - f["window_start"].iloc[0])
        end = f["window_start"].iloc[0] + min(BASELINE_DAYS * 86_400.0,
                                              BASELINE_MAX_FRACTION * span)
        base = f[f["steady"] & (f["window_start"] < end)]
        constant = index_constant(base["eta_raw"].to_numpy(), base["eta_ref"].to_numpy())
        u = ctx["units"][code]
        u["constant"] = constant.value
        frame = frames[code]
        gross = float(np.nanmean(frame["headwater_level"].to_numpy()
                                 - frame["tailwater_level"].to_numpy()))
        u["rho"] = float(density(float(np.nanmean(frame["water_temperature"].to_numpy())),
                                 float(atmospheric_pressure(ctx["elevation"]))
                                 + 0.5 * 1000.0 * ctx["gravity"] * gross))
        detail[code] = {"index_constant": round(constant.value, 6),
                        "baseline_windows": constant.n_used, "rho_bare": round(u["rho"], 3)}
    return detail


def _checks(frames: dict[str, Any], path: dict[str, Any], bare: dict[str, np.ndarray]
            ) -> dict[str, Any]:
    """Untimed checks that both sides computed the same physics, and that it is right."""
    import pandas as pd

    checks: dict[str, Any] = {}
    for code, res in path.items():
        f = res.frame
        steady = f[f["steady"]]
        slot = frames[code]["ts_us"].to_numpy() // 1_000_000 // res.window_s * res.window_s
        per_window = pd.Series(bare[code]).groupby(slot).mean()
        mean_bare = per_window.reindex(steady["window_start"].to_numpy()).to_numpy()
        relative = mean_bare / steady["eta_raw"].to_numpy() - 1.0
        points, at = PLANTED_STEP.get(code, (0.0, 1.0))
        t = steady["window_start"].to_numpy()
        cut = t[0] + at * (f["window_start"].iloc[-1] - f["window_start"].iloc[0])
        checks[code] = {
            "windows": len(f), "steady_windows": len(steady),
            # mean of the per-sample formula over a window vs the path's value from the
            # window means: differ only by averaging a non-linear formula and by the
            # path's per-window IAPWS density against one density per unit
            "bare_vs_path_median_rel": float(np.nanmedian(np.abs(relative))),
            "bare_vs_path_p99_rel": float(np.nanpercentile(np.abs(relative), 99)),
            "planted_loss_points": points,
            "deviation_points_before": float(100 * np.nanmedian(
                steady["deviation"].to_numpy()[t < cut])),
            "deviation_points_after": float(100 * np.nanmedian(
                steady["deviation"].to_numpy()[t >= cut])) if (t >= cut).any() else None,
        }
    return checks


def _profile_top(call: Any, *, by: str = "tottime", own_code: bool = False,
                 lines: int = 16) -> str:
    """cProfile of ``call()``: the top ``lines`` by ``by``, optionally the repo's code only."""
    profiler = cProfile.Profile()
    profiler.enable()
    call()
    profiler.disable()
    text = io.StringIO()
    stats = pstats.Stats(profiler, stream=text).sort_stats(by)
    if own_code:
        stats.print_stats(rf"{_BENCH_DIR.parent}/(jobs|analytics|store|ingest)/", lines)
    else:
        stats.print_stats(lines)
    return text.getvalue()


def child_pure(args: argparse.Namespace) -> dict[str, Any]:
    from hydrodrift.demofleet import DEFAULT_START, write_plant_files

    plants = {pf.plant.code: pf
              for _, pf in write_plant_files(args.workdir / "pure", DEFAULT_START)}
    plant = plants[PLANT]
    n_unit = args.samples // len(UNITS)
    started = time.perf_counter()
    _say(f"pure: synthesising {n_unit * len(UNITS):,} samples (1 s, {len(UNITS)} units) ...")
    frames = synthesise(n_unit, plant)
    samples = sum(len(f) for f in frames.values())
    synth_s = time.perf_counter() - started
    input_mb = sum(f.memory_usage(index=False).sum() for f in frames.values()) / 2**20
    _say(f"pure: {samples:,} samples ({input_mb:.0f} MB of frames) in {synth_s:.1f} s; "
         "fixing index constants (untimed) ...")
    ctx = _pure_context(plant)
    constants = _fix_constants(frames, ctx)
    path_s, bare_s = [], []
    peaks: dict[str, float] = {"path": 0.0, "bare": 0.0}
    _trim_heap()
    rss_start = _rss_mb()
    resettable = True
    path = bare = None
    for k in range(args.repeats):
        for name in (("bare", "path") if k % 2 == 0 else ("path", "bare")):
            path = bare = None  # drop the previous results before measuring
            resettable &= _reset_peak_rss()
            t0 = time.perf_counter()
            if name == "path":
                path = run_path(frames, ctx)
                path_s.append(time.perf_counter() - t0)
            else:
                bare = run_bare(frames, ctx)
                bare_s.append(time.perf_counter() - t0)
            peaks[name] = max(peaks[name], _peak_rss_mb())
            _say(f"pure: run {k + 1} {name}: {(path_s if name == 'path' else bare_s)[-1]:.3f} s")
    path = run_path(frames, ctx) if path is None else path
    bare = run_bare(frames, ctx) if bare is None else bare
    checks = _checks(frames, path, bare)
    for code in UNITS:
        checks[code].update(constants[code])
    result = {"samples": samples, "units": list(UNITS), "sample_interval_s": 1.0,
              "synthesis_s": synth_s, "input_mb": input_mb, "path_s": path_s, "bare_s": bare_s,
              "peak_rss_mb_path": peaks["path"], "peak_rss_mb_bare": peaks["bare"],
              "rss_before_timing_mb": rss_start,
              "peak_is_per_phase": resettable, "checks": checks}
    if args.profile:
        _say("pure: cProfile of one path run (by own time):\n"
             + _profile_top(lambda: run_path(frames, ctx)))
    result["peak_rss_mb"] = _peak_rss_mb()
    return result


# --------------------------------------------------------------------------- part 2


def split_export(path: Path, plant: Any, cut: datetime, history_dir: Path, last_dir: Path
                 ) -> tuple[Path | None, Path | None]:
    """Split one export at ``cut`` (UTC): rows before it, and from it on.

    Header and preamble lines are kept in both parts. Rows are cut at the first row whose
    timestamp is at or after ``cut`` (rows are in time order; an unparseable timestamp stays
    where it is). Naive local times (``time_basis = "local"``) are compared with the cut in
    plant-local wall time: exact except inside a DST fold, where the bench's cut (00:00 UTC)
    never falls for the demo plants.
    """
    from zoneinfo import ZoneInfo

    import pandas as pd

    ex = plant.export
    text = path.read_bytes().decode(ex.encoding)
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    head, body = lines[:ex.skip_lines + 1], lines[ex.skip_lines + 1:]
    column = head[-1].split(ex.delimiter).index(ex.timestamp_column)
    stamps = pd.Series([line.split(ex.delimiter, column + 1)[column] for line in body])
    fmt = "ISO8601" if ex.timestamp_format == "ISO8601" else ex.timestamp_format
    if ex.time_basis == "offset":
        times = pd.to_datetime(stamps, format=fmt, utc=True, errors="coerce")
        edge = pd.Timestamp(cut)
    else:
        times = pd.to_datetime(stamps, format=fmt, errors="coerce")
        zone = UTC if ex.time_basis == "utc" else ZoneInfo(plant.plant.timezone)
        edge = pd.Timestamp(cut.astimezone(zone).replace(tzinfo=None))
    after = (times >= edge).to_numpy()
    k = int(np.argmax(after)) if after.any() else len(body)
    written: list[Path | None] = []
    for folder, rows in ((history_dir, body[:k]), (last_dir, body[k:])):
        if not rows:
            written.append(None)
            continue
        target = folder / plant.plant.code / path.name
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(("\n".join(head + rows) + "\n").encode(ex.encoding))
        written.append(target)
    return written[0], written[1]


def child_prep(args: argparse.Namespace) -> dict[str, Any]:
    """Generate the demo fleet for history + 1 days and split every export (untimed)."""
    from hydrodrift.demofleet import DEFAULT_START, generate_demo
    from ingest.plant_file import load_plant_file

    root = args.workdir / "demo"
    started = time.perf_counter()
    _say(f"store: generating the demo fleet, {args.history_days + 1} days ...")
    manifest = generate_demo(root, days=args.history_days + 1)
    generated = time.perf_counter() - started
    cut = DEFAULT_START + timedelta(days=args.history_days)
    plants = {load_plant_file(p).plant.code: (p, load_plant_file(p))
              for p in manifest.plant_files}
    history, last = [], []
    for path in manifest.export_files:
        _, plant = plants[path.parent.name]
        before, after = split_export(path, plant, cut, args.workdir / "history",
                                     args.workdir / "last")
        history += [str(before)] if before else []
        last += [str(after)] if after else []
    listing = {"plants": [str(p) for p, _ in plants.values()], "history": history,
               "last": last, "cut": cut.isoformat(), "rows_written": manifest.rows_written}
    (args.workdir / "manifest.json").write_text(json.dumps(listing), encoding="utf-8")
    _say(f"store: {manifest.rows_written:,} export rows generated in {generated:.1f} s, split "
         f"at {cut:%Y-%m-%d %H:%M} UTC into {len(history)} history and {len(last)} last-day "
         f"files in {time.perf_counter() - started - generated:.1f} s")
    return {"seconds": time.perf_counter() - started, "generate_s": generated,
            "history_files": len(history), "last_files": len(last),
            "rows_written": manifest.rows_written}


def _store_setup(args: argparse.Namespace, name: str) -> tuple[Any, Any, Any]:
    from hydrodrift.settings import Settings
    from ingest.registry import import_plant_file
    from store.engine import make_engine
    from store.migrate import ensure_schema

    if args.backend == "pg":
        url, schema = args.pg_url, args.schema
        engine = make_engine(url, schema=schema)
    else:
        url, schema = f"sqlite:///{args.workdir / (name + '.sqlite3')}", None
        engine = make_engine(url)
    ensure_schema(engine)
    listing = json.loads((args.workdir / "manifest.json").read_text(encoding="utf-8"))
    for plant in listing["plants"]:
        import_plant_file(engine, Path(plant))
    settings = Settings(_env_file=None, data_dir=args.workdir / f"data_{name}",
                        database_url=url, database_schema=schema)
    return engine, settings, listing


def _ingest(engine: Any, settings: Any, paths: list[str]) -> tuple[list[int], int, float]:
    from ingest.pipeline import ingest_file

    started = time.perf_counter()
    ids, rows = [], 0
    for path in paths:
        outcome = ingest_file(engine, Path(path), settings=settings)
        if outcome.status != "loaded" or outcome.file_id is None:
            raise RuntimeError(f"ingest {path}: {outcome.status}: {outcome.message}")
        ids.append(outcome.file_id)
        rows += outcome.rows_total
    return ids, rows, time.perf_counter() - started


def _uncompute(engine: Any, file_ids: list[int]) -> None:
    """Delete the computed marks of ``file_ids``: the next compute redoes the same work."""
    from sqlalchemy import delete

    from store.engine import session_scope
    from store.models import ComputedFile

    with session_scope(engine) as session:
        session.execute(delete(ComputedFile).where(ComputedFile.ingested_file_id.in_(file_ids)))


def _timed_compute(engine: Any, settings: Any, expected_files: int,
                   profile: bool = False) -> tuple[float, Any, str]:
    from jobs.compute import compute

    report = ""
    started = time.perf_counter()
    if profile:
        box: list[Any] = []
        report = _profile_top(lambda: box.append(compute(engine, settings)),
                              by="cumulative", own_code=True, lines=24)
        summary = box[0]
    else:
        summary = compute(engine, settings)
    seconds = time.perf_counter() - started
    if summary.problems or summary.files != expected_files:
        raise RuntimeError(f"compute: {summary.files} of {expected_files} files; "
                           f"problems: {summary.problems}")
    return seconds, summary, report


def _summary(s: Any) -> dict[str, Any]:
    return {"files": s.files, "units": s.units, "windows": s.windows,
            "steady_windows": s.steady_windows, "weeks": s.weeks,
            "references_created": len(s.references_created),
            "constants_set": len(s.constants_set)}


def _read_constants(engine: Any) -> list[dict[str, Any]]:
    """Each reference's index constant and baseline, keyed by plant and unit code."""
    from sqlalchemy import select

    from store.engine import session_scope
    from store.models import Plant, ReferenceModel, Unit

    with session_scope(engine) as session:
        rows = session.execute(
            select(Plant.code, Unit.code, ReferenceModel.version, ReferenceModel.index_constant,
                   ReferenceModel.baseline_start, ReferenceModel.baseline_end,
                   ReferenceModel.index_constant_detail)
            .join(Unit, Unit.plant_id == Plant.id)
            .join(ReferenceModel, ReferenceModel.unit_id == Unit.id)).all()
    return [{"plant": p, "unit": u, "version": v, "index_constant": k,
             "baseline_start": None if s is None else s.isoformat(),
             "baseline_end": None if e is None else e.isoformat(), "detail": d}
            for p, u, v, k, s, e, d in rows]


def _write_constants(engine: Any, constants: list[dict[str, Any]]) -> int:
    """Give this database's references the history database's index constants."""
    from sqlalchemy import select

    from store.engine import session_scope
    from store.models import Plant, ReferenceModel, Unit

    changed = 0
    with session_scope(engine) as session:
        for c in constants:
            if c["index_constant"] is None:
                continue
            reference = session.scalar(
                select(ReferenceModel).join(Unit, ReferenceModel.unit_id == Unit.id)
                .join(Plant, Unit.plant_id == Plant.id)
                .where(Plant.code == c["plant"], Unit.code == c["unit"],
                       ReferenceModel.version == c["version"]))
            if reference is None:
                continue
            reference.index_constant = c["index_constant"]
            reference.baseline_start = (None if c["baseline_start"] is None
                                        else datetime.fromisoformat(c["baseline_start"]))
            reference.baseline_end = (None if c["baseline_end"] is None
                                      else datetime.fromisoformat(c["baseline_end"]))
            reference.index_constant_detail = c["detail"]
            changed += 1
    return changed


def _compute_runs(engine: Any, settings: Any, ids: list[int], count: int, label: str,
                  args: argparse.Namespace, *, first_is_fresh: bool) -> dict[str, Any]:
    """``count`` timed computes of the files ``ids``, the marks deleted before each rerun."""
    runs, summaries, peaks = [], [], []
    for k in range(count):
        if k or not first_is_fresh:
            _uncompute(engine, ids)
        _reset_peak_rss()
        seconds, summary, _ = _timed_compute(engine, settings, len(ids))
        peaks.append(_peak_rss_mb())
        runs.append(seconds)
        summaries.append(_summary(summary))
        _say(f"store {label}: run {k + 1}: {seconds:.3f} s ({summary.line()})")
    if args.profile:  # one more run, profiled; not among the timed ones
        _uncompute(engine, ids)
        _, _, report = _timed_compute(engine, settings, len(ids), profile=True)
        _say(f"store {label}: cProfile of one more run (cumulative, the repo's code):\n"
             f"{report}")
    return {"runs_s": runs, "summary": summaries[-1], "peak_rss_mb": max(peaks)}


def child_store(args: argparse.Namespace) -> dict[str, Any]:
    """One database: ``history`` (the history, then the day) or ``empty`` (the day alone).

    The empty database is timed in three states: fresh (the first run calibrates the
    references), references in place (reruns), and references in place with the history
    database's index constants written in (the same state as the history side but for the
    history itself).
    """
    role, label = args.role, f"{args.backend} {args.role}"
    engine, settings, listing = _store_setup(args, role)
    out: dict[str, Any] = {"backend": args.backend, "role": role}
    handover = args.workdir / f"constants_{args.backend}.json"
    if role == "history":
        _say(f"store {label}: ingesting {len(listing['history'])} history files ...")
        _, rows, seconds = _ingest(engine, settings, listing["history"])
        out.update(history_rows=rows, ingest_history_s=seconds)
        _say(f"store {label}: {rows:,} rows in {seconds:.1f} s; computing the history ...")
        seconds, summary, _ = _timed_compute(engine, settings, len(listing["history"]))
        out.update(compute_history_s=seconds, history_summary=_summary(summary))
        _say(f"store {label}: {summary.line()}")
        handover.write_text(json.dumps(_read_constants(engine)), encoding="utf-8")
    ids, rows, seconds = _ingest(engine, settings, listing["last"])
    out.update(last_rows=rows, ingest_last_s=seconds, setup_peak_rss_mb=_peak_rss_mb())
    if role == "history":
        out["day"] = _compute_runs(engine, settings, ids, args.repeats, f"{label} last day",
                                   args, first_is_fresh=True)
    else:
        out["fresh"] = _compute_runs(engine, settings, ids, 1, f"{label} fresh", args,
                                     first_is_fresh=True)
        out["references"] = _compute_runs(engine, settings, ids, args.repeats,
                                          f"{label} references in place", args,
                                          first_is_fresh=False)
        constants = json.loads(handover.read_text(encoding="utf-8"))
        out["constants_copied"] = _write_constants(engine, constants)
        out["matched"] = _compute_runs(engine, settings, ids, args.repeats,
                                       f"{label} references and constants in place", args,
                                       first_is_fresh=False)
    engine.dispose()
    out["peak_rss_mb"] = _peak_rss_mb()
    return out


def run_child(args: argparse.Namespace) -> None:
    if args.child == "pure":
        result = child_pure(args)
    elif args.child == "prep":
        result = child_prep(args)
    else:
        result = child_store(args)
    print(json.dumps(result))


# --------------------------------------------------------------------------- parent


def _spawn(child: str, args: argparse.Namespace, workdir: Path, **extra: str) -> dict[str, Any]:
    """Run a child; relay its stderr live; its last stdout line is its JSON result."""
    command = [sys.executable, str(Path(__file__).resolve()), "--child", child,
               "--workdir", str(workdir), "--samples", str(args.samples),
               "--history-days", str(args.history_days), "--repeats", str(args.repeats),
               "--pg-url", args.pg_url]
    if args.profile:
        command.append("--profile")
    for key, value in extra.items():
        command += [f"--{key}", value]
    tail: deque[str] = deque(maxlen=8)
    with subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                          text=True) as proc:
        def relay() -> None:
            assert proc.stderr is not None
            for line in proc.stderr:
                tail.append(line.rstrip())
                sys.stderr.write(line)
                sys.stderr.flush()

        reader = threading.Thread(target=relay, daemon=True)
        reader.start()
        assert proc.stdout is not None
        stdout = proc.stdout.read()
        proc.wait()
        reader.join()
    if proc.returncode != 0:
        return {"error": f"{child} failed (exit {proc.returncode}):\n" + "\n".join(tail)}
    return json.loads(stdout.strip().splitlines()[-1])


def _pg_problem(url: str) -> str | None:
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


def _ratio(a: float | None, b: float | None) -> float | None:
    return None if a is None or b is None or b <= 0 else round(a / b, 3)


def _store_figures(history: dict[str, Any], empty: dict[str, Any]) -> dict[str, Any]:
    """Times [s] and ratios of one backend; every ratio's numerator is the history side."""
    t_history = min(history["day"]["runs_s"])
    t_fresh = empty["fresh"]["runs_s"][0]
    t_references = min(empty["references"]["runs_s"])
    t_matched = min(empty["matched"]["runs_s"])
    return {
        "t_history_s": round(t_history, 4),
        "t_empty_s": round(t_matched, 4),
        "t_empty_no_constant_s": round(t_references, 4),
        "t_empty_with_calibration_s": round(t_fresh, 4),
        "incremental_ratio": _ratio(t_history, t_matched),
        "incremental_ratio_no_constant": _ratio(t_history, t_references),
        "incremental_ratio_with_calibration": _ratio(t_history, t_fresh),
        "history_runs_s": [round(s, 4) for s in history["day"]["runs_s"]],
        "empty_runs_s": [round(s, 4) for s in empty["matched"]["runs_s"]],
        "empty_no_constant_runs_s": [round(s, 4) for s in empty["references"]["runs_s"]],
        "constants_copied": empty["constants_copied"],
        "same_windows": (history["day"]["summary"]["windows"]
                         == empty["matched"]["summary"]["windows"]
                         == empty["fresh"]["summary"]["windows"]),
        "last_day": history["day"]["summary"],
        "last_day_rows": history["last_rows"],
        "history": {"rows": history["history_rows"],
                    "ingest_s": round(history["ingest_history_s"], 2),
                    "compute_s": round(history["compute_history_s"], 2),
                    "summary": history["history_summary"]},
    }


def _print_pure(pure: dict[str, Any]) -> None:
    n = pure["samples"]
    for name in ("bare", "path"):
        best = min(pure[f"{name}_s"])
        runs = ", ".join(f"{s:.3f}" for s in pure[f"{name}_s"])
        label = ("bare numpy formula per sample (baseline)" if name == "bare"
                 else "unit_windows: steady + index + ref + dev")
        print(f"{label:<44} {n:>11,} samples {best:7.3f} s {n / best:>13,.0f} samples/s  "
              f"peak RSS {pure[f'peak_rss_mb_{name}']:6.0f} MB  (runs {runs})")
    print(f"  frames held: {pure['input_mb']:.0f} MB; RSS when the timing starts "
          f"{pure['rss_before_timing_mb']:.0f} MB (data, libraries, allocator)")
    for code, c in pure["checks"].items():
        after = c["deviation_points_after"]
        print(f"  {code}: {c['windows']:,} windows, {c['steady_windows']:,} steady; index "
              f"constant {c['index_constant']:.5f} from {c['baseline_windows']} windows; "
              f"deviation {c['deviation_points_before']:+.3f} points before, "
              + ("n/a" if after is None else f"{after:+.3f}") + " after the planted "
              f"-{c['planted_loss_points']:.1f}; window mean of the per-sample formula vs the "
              f"path: median {c['bare_vs_path_median_rel']:.1e}, p99 "
              f"{c['bare_vs_path_p99_rel']:.1e} relative")


def _print_store(backend: str, figures: dict[str, Any], days: int) -> None:
    h = figures["history"]
    print(f"{backend}: history of {days} days: {h['rows']:,} rows ingested in "
          f"{h['ingest_s']:.1f} s, computed in {h['compute_s']:.1f} s "
          f"({h['summary']['windows']:,} windows, {h['summary']['weeks']} weekly rows)")
    rows = (
        (f"last day on {days} days of history", figures["t_history_s"],
         figures["history_runs_s"], None),
        ("empty: references + constants in place", figures["t_empty_s"],
         figures["empty_runs_s"], figures["incremental_ratio"]),
        ("empty: references in place, no constant", figures["t_empty_no_constant_s"],
         figures["empty_no_constant_runs_s"], figures["incremental_ratio_no_constant"]),
        ("empty: fresh, calibrating the references", figures["t_empty_with_calibration_s"],
         [figures["t_empty_with_calibration_s"]],
         figures["incremental_ratio_with_calibration"]),
    )
    for label, best, runs, ratio in rows:
        against = "" if ratio is None else f"  history / this = {ratio}"
        print(f"{backend}: {label:<42} {best:7.3f} s (runs {runs}){against}")
    print(f"{backend}: {figures['last_day_rows']:,} last-day rows, "
          f"{figures['last_day']['windows']} windows, {figures['last_day']['weeks']} weekly "
          f"rows per run; same windows on every side: {figures['same_windows']}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true",
                        help=f"smoke run: {QUICK_SAMPLES:,} samples, {QUICK_HISTORY_DAYS} days "
                        "of history")
    parser.add_argument("--samples", type=int, help=f"default {FULL_SAMPLES:,}")
    parser.add_argument("--history-days", type=int, help=f"default {FULL_HISTORY_DAYS}")
    parser.add_argument("--repeats", type=int, default=3, help="timed runs per path (best)")
    parser.add_argument("--pg-url", default=DEFAULT_PG_URL)
    parser.add_argument("--no-pg", action="store_true", help="skip PostgreSQL")
    parser.add_argument("--pure-only", action="store_true", help="part 1 only")
    parser.add_argument("--store-only", action="store_true", help="part 2 only")
    parser.add_argument("--profile", action="store_true",
                        help="print a cProfile of the path and of the last-day compute")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--workdir", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--schema", help=argparse.SUPPRESS)
    parser.add_argument("--backend", help=argparse.SUPPRESS)
    parser.add_argument("--role", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.samples is None:
        args.samples = QUICK_SAMPLES if args.quick else FULL_SAMPLES
    if args.history_days is None:
        args.history_days = QUICK_HISTORY_DAYS if args.quick else FULL_HISTORY_DAYS
    if args.samples < 200_000 or args.history_days < 3 or args.repeats < 1:
        parser.error("--samples >= 200000, --history-days >= 3, --repeats >= 1")
    if args.pure_only and args.store_only:
        parser.error("--pure-only and --store-only exclude each other")
    if args.child:
        run_child(args)
        return 0

    from store.engine import drop_schema, make_engine

    wall = time.perf_counter()
    workdir = Path(tempfile.mkdtemp(prefix="hd_bench_analytics_"))
    schemas: list[str] = []
    results: dict[str, dict[str, Any]] = {}
    notes: list[str] = []
    try:
        if not args.store_only:
            _say("running part 1 (pure analytics) ...")
            results["pure"] = _spawn("pure", args, workdir)
        backends: list[str] = []
        if not args.pure_only:
            backends = ["sqlite"]
            if not args.no_pg:
                problem = _pg_problem(args.pg_url)
                if problem is None:
                    backends.append("pg")
                else:
                    notes.append(f"PostgreSQL not reachable at {args.pg_url}: {problem}")
                    _say(notes[-1] + "; SQLite only")
            results["prep"] = _spawn("prep", args, workdir)
            if "error" in results["prep"]:
                backends = []
        tag = f"{os.getpid()}_{secrets.token_hex(3)}"
        for backend in backends:
            for role in ("history", "empty"):
                if role == "empty" and "error" in results[f"{backend}_history"]:
                    continue  # it needs the history side's index constants
                extra = {"backend": backend, "role": role}
                if backend == "pg":
                    extra["schema"] = f"hd_bench_{tag}_{role}"
                    schemas.append(extra["schema"])
                _say(f"running part 2 ({backend}, {role}) ...")
                results[f"{backend}_{role}"] = _spawn("store", args, workdir, **extra)

        errors = {k: r["error"] for k, r in results.items() if "error" in r}
        summary: dict[str, Any] = {"mode": "quick" if args.quick else "full"}
        pure = results.get("pure")
        if pure and "error" not in pure:
            _print_pure(pure)
            best_path, best_bare = min(pure["path_s"]), min(pure["bare_s"])
            summary.update(
                samples=pure["samples"], units=pure["units"], sample_interval_s=1.0,
                samples_per_s=round(pure["samples"] / best_path),
                bare_numpy_samples_per_s=round(pure["samples"] / best_bare),
                ratio_vs_bare_numpy=_ratio(best_path, best_bare),
                path_s=[round(s, 4) for s in pure["path_s"]],
                bare_s=[round(s, 4) for s in pure["bare_s"]],
                input_mb=round(pure["input_mb"], 1),
                rss_before_timing_mb=round(pure["rss_before_timing_mb"], 1),
                checks=pure["checks"])
        store: dict[str, Any] = {}
        for backend in backends:
            history = results[f"{backend}_history"]
            empty = results.get(f"{backend}_empty", {"error": "not run"})
            if "error" in history or "error" in empty:
                continue
            store[backend] = _store_figures(history, empty)
            _print_store(backend, store[backend], args.history_days)
        if store:
            summary["history_days"] = args.history_days
            summary["incremental_ratio"] = max(f["incremental_ratio"] for f in store.values())
            for key in ("incremental_ratio_no_constant", "incremental_ratio_with_calibration"):
                summary[key] = max(f[key] for f in store.values())
            summary["incremental_ratio_definition"] = (
                "best compute of the last day on the history / best compute of the same day "
                "on an empty history whose references and index constants are already in "
                "place (the same state but for the history); the worse of the backends")
            summary["incremental"] = store
        peaks: dict[str, float] = {}
        if pure and "error" not in pure:
            peaks.update(pure_path=pure["peak_rss_mb_path"], pure_bare=pure["peak_rss_mb_bare"])
            summary["pure_peak_is_per_phase"] = pure["peak_is_per_phase"]
        for backend in store:
            empty = results[f"{backend}_empty"]
            peaks[f"{backend}_compute_history"] = results[f"{backend}_history"]["day"][
                "peak_rss_mb"]
            peaks[f"{backend}_compute_empty"] = max(empty[k]["peak_rss_mb"]
                                                    for k in ("fresh", "references", "matched"))
        summary["peak_rss_mb"] = round(max(peaks.values(), default=0.0), 1)
        summary["peak_rss_mb_by_path"] = {k: round(v, 1) for k, v in peaks.items()}
        setup = {k: round(r["peak_rss_mb"], 1) for k, r in results.items()
                 if "peak_rss_mb" in r}
        summary["peak_rss_mb_whole_child"] = setup
        summary["wall_s"] = round(time.perf_counter() - wall, 1)
        summary["notes"] = notes
        summary["errors"] = errors
        for problem in errors.values():
            print(problem)
        if "ratio_vs_bare_numpy" in summary:
            met = summary["ratio_vs_bare_numpy"] <= 5.0
            print(f"ratio_vs_bare_numpy {summary['ratio_vs_bare_numpy']} (target <= 5): "
                  f"{'met' if met else 'MISSED'}")
        if "incremental_ratio" in summary:
            met = summary["incremental_ratio"] <= 2.0
            print(f"incremental_ratio {summary['incremental_ratio']} (target <= 2): "
                  f"{'met' if met else 'MISSED'}")
        print(json.dumps(summary))
        return 1 if errors else 0
    finally:
        for schema in schemas:
            drop_schema(make_engine(args.pg_url), schema)
        shutil.rmtree(workdir, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
