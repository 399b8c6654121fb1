"""The fictional demo fleet: plant files, a year of SCADA-style exports and the ground truth.

Everything written here is INVENTED (owner, plants, places, machines, data). Use it to
demonstrate and test the pipeline, never as engineering data.

``generate_demo(root)`` writes, deterministically for a seed::

    root/plants/<code>.toml           plant files (ingest.plant_file schema)
    root/exports/<code>/<prefix>_YYYY-MM.csv   one export per plant per local month
    root/truth.json                   what was planted: degradation, faults, outages,
                                      condition-monitoring signatures

The signatures (cavitation, vortex rope, bearing) show what a monitoring service would
flag; on a real unit such flags call for inspection by qualified staff, and local codes and
licensed practice prevail.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np

from hydrodrift.demofleet.dispatch import PlantSimulation, simulate_plant
from hydrodrift.demofleet.exports import plant_toml, write_exports
from hydrodrift.demofleet.physics import CAM_MISTUNE_DEG, unit_physics
from hydrodrift.demofleet.scenario import (
    CONDITIONS,
    DEFAULT_START,
    FLEET_OWNER,
    MIN_DAYS,
    OUTAGES,
    PLANTS,
    SAMPLE_SECONDS,
    SIGNATURES,
)
from ingest.plant_file import PlantFile, load_plant_file

__all__ = ["DemoManifest", "generate_demo", "simulate_fleet"]

#: Version of the truth file's layout.
TRUTH_FORMAT = "hydrodrift-demo-truth/1"


@dataclass
class DemoManifest:
    """What :func:`generate_demo` wrote."""

    root: Path
    plant_files: list[Path]
    export_files: list[Path]
    truth_file: Path
    rows_written: int  #: data rows over all exports (header and preamble lines excluded)


def _check_start(start: datetime | None) -> datetime:
    if start is None:
        return DEFAULT_START
    if start.tzinfo is None:
        raise ValueError("start must be timezone-aware, e.g. datetime(2026, 3, 5, tzinfo=UTC)")
    start = start.astimezone(UTC)
    if start.second or start.microsecond or start.minute % (SAMPLE_SECONDS // 60):
        raise ValueError(f"start must fall on a {SAMPLE_SECONDS // 60}-minute boundary")
    return start


def write_plant_files(root: Path, start: datetime) -> list[tuple[Path, PlantFile]]:
    """Write every plant file under ``root/plants`` and read each back through the schema."""
    folder = root / "plants"
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for design in PLANTS:
        path = folder / f"{design.code.lower()}.toml"
        path.write_bytes(plant_toml(design, start).encode("utf-8"))
        written.append((path, load_plant_file(path)))
    return written


def simulate_fleet(plants: list[PlantFile], *, start: datetime = DEFAULT_START,
                   days: int = 365, seed: int = 20261201) -> list[PlantSimulation]:
    """Simulate every plant (no files): noise-free truth and measured signals."""
    by_code = {p.plant.code: p for p in plants}
    return [simulate_plant(design, by_code[design.code], start=start, days=days, seed=seed)
            for design in PLANTS]


def generate_demo(root: Path, *, seed: int = 20261201, days: int = 365,
                  progress: Callable[[str, int, int], None] | None = None,
                  start: datetime | None = None) -> DemoManifest:
    """Write the demo fleet under ``root``; same arguments give byte-identical files.

    Parameters
    ----------
    root : folder to write into (created if missing; files of a previous run are replaced)
    seed : random seed of the scenario
    days : int [d] length of the span, at least ``scenario.MIN_DAYS``
    progress : called as ``progress(stage, done, total)`` after each step
    start : aware datetime of the first sample; default 2025-12-01T00:00Z (a Monday)

    Returns
    -------
    DemoManifest
    """
    if days < MIN_DAYS:
        raise ValueError(f"days must be at least {MIN_DAYS}, got {days}")
    begin = _check_start(start)
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    total = 2 + 2 * len(PLANTS)
    step = 0

    def report(stage: str) -> None:
        nonlocal step
        step += 1
        if progress is not None:
            progress(stage, step, total)

    written = write_plant_files(root, begin)
    report("plant files")
    export_files: list[Path] = []
    rows = 0
    faults: list[dict[str, Any]] = []
    per_file: list[dict[str, Any]] = []
    simulations = []
    for _, plant in written:
        design = next(d for d in PLANTS if d.code == plant.plant.code)
        sim = simulate_plant(design, plant, start=begin, days=days, seed=seed)
        report(f"simulate {design.code}")
        result = write_exports(sim, root)
        report(f"exports {design.code}")
        simulations.append(sim)
        export_files += result.files
        rows += result.rows
        faults += result.faults
        per_file += result.per_file
    truth = _truth(seed, begin, days, written, simulations, faults, per_file, rows, root)
    truth_file = root / "truth.json"
    truth_file.write_bytes((json.dumps(truth, indent=2, ensure_ascii=False) + "\n").encode())
    report("truth")
    return DemoManifest(root=root, plant_files=[p for p, _ in written],
                        export_files=export_files, truth_file=truth_file, rows_written=rows)


def _iso(moment: datetime) -> str:
    return moment.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _truth(seed: int, start: datetime, days: int, written: list[tuple[Path, PlantFile]],
           simulations: list[PlantSimulation], faults: list[dict[str, Any]],
           per_file: list[dict[str, Any]], rows: int, root: Path) -> dict[str, Any]:
    end = start + timedelta(days=days)
    conditions = {(c.plant, c.unit): c for c in CONDITIONS}
    units = []
    for sim in simulations:
        for spec in sim.plant.units:
            c = conditions.get((sim.design.code, spec.code))
            physics = unit_physics(sim.design.code, spec.code)
            bep = physics.chart.best_efficiency_point(spec.rated_head)
            op = sim.units[spec.code]
            entry: dict[str, Any] = {
                "plant": sim.design.code, "unit": spec.code, "runner_type": spec.runner_type,
                "condition": "healthy" if c is None else c.kind,
                "as_built_coefficients": {k: round(float(v), 9)
                                          for k, v in physics.model.coefficients.items()},
                "as_built_bep": {"head_m": bep.head, "power_w": round(bep.power, 1),
                                 "flow_m3_s": round(bep.flow, 4),
                                 "efficiency": round(bep.efficiency, 6)},
                "mean_off_cam_effect_points": round(100 * float(
                    np.mean(op.off_cam_effect[op.online])) if op.online.any() else 0.0, 4),
                "hours_online": round(float(op.online.sum()) * SAMPLE_SECONDS / 3600, 1),
                "starts": int(((~op.online[:-1]) & op.online[1:]).sum()),
                "energy_mwh": round(float(op.generator_power.sum()) * SAMPLE_SECONDS
                                    / 3.6e9, 1),
            }
            if c is not None:
                entry.update(since=_iso(c.since), cause=c.cause,
                             in_span=bool(start <= c.since < end) or c.kind == "gradual")
                if c.kind == "gradual":
                    entry["rate_points_per_year"] = c.rate_points_per_year
                else:
                    entry["step_points"] = c.step_points
            units.append(entry)
    counts: dict[str, int] = {}
    for f in faults:
        amount = f.get("cells") or f.get("rows_absent") or f.get("rows") or 0
        counts[f["kind"]] = counts.get(f["kind"], 0) + int(amount)
    for entry in per_file:
        mine = [f for f in faults if f.get("file") == entry["file"]]
        entry["rows_rejected_expected"] = sum(f.get("rows", 0) for f in mine
                                              if f["kind"] == "bad_timestamp")
        entry["rows_absent"] = sum(f.get("rows_absent", 0) for f in mine)
        entry["sentinel_cells"] = sum(f["cells"] for f in mine if f["kind"] == "sentinel")
        entry["text_cells"] = sum(f["cells"] for f in mine if f["kind"] == "text")
    return {
        "format": TRUTH_FORMAT,
        "fictional": True,
        "owner": FLEET_OWNER,
        "seed": seed,
        "start": _iso(start),
        "end": _iso(end),
        "days": days,
        "sample_seconds": SAMPLE_SECONDS,
        "rows_written": rows,
        "plants": [{"code": s.design.code, "name": s.design.name, "timezone": s.design.timezone,
                    "plant_file": p.relative_to(root).as_posix(), "layout": s.design.layout}
                   for (p, _), s in zip(written, simulations, strict=True)],
        "physics": {
            "water_density": "IAPWS-IF97 at the water temperature and the mean pressure of the "
                             "two reference sections (analytics.water)",
            "gravity": "IEC 60041 formula at the plant's latitude and elevation "
                       "(analytics.site)",
            "cam_mistune_deg": {f"{p}/{u}": v for (p, u), v in CAM_MISTUNE_DEG.items()},
            "net_head": "gross head minus k_p Q^2, no velocity-head terms; gross head is "
                        "headwater minus tailwater (Francis, Kaplan) or minus the jet-circle "
                        "elevation (Pelton)",
            "efficiency": "turbine efficiency = the unit's as-built velocity-triangle model "
                          "(analytics.runners, coefficients above) on its installed cam, plus "
                          "the off-cam effect of the governor's blade-angle error (Kaplan), "
                          "minus the unit's degradation, minus the cavitation deficit "
                          "during its cavitation signatures",
            "condition_monitoring": "invented levels: hf_vibration is the RMS "
                          "cavitation-band acceleration, a (0.35 + 0.65 load) plus the "
                          "cavitation rise; draft_tube_pulsation is the peak-to-peak "
                          "draft-tube pressure pulsation, (base + part-load hump + vortex-rope "
                          "rise) x rho g H with H the net head (Francis and Kaplan only); "
                          "guide-bearing rise over cooling water grows by the bearing "
                          "signature's rise_factor; load = P_gen / P_rated",
            "signatures": "each signature acts only within [start, end) UTC; 'magnitude' "
                          "gives its parameters (SI; loads as fractions of rated power, "
                          "pulsations as fractions of rho g H); cavitation also lowers the "
                          "plant's tailwater and holds the unit at high load, a vortex rope "
                          "holds the unit at part load",
            "energy_balance": "P_gen = rho g Q H eta_turbine eta_generator (noise-free)",
            "winter_kennedy": "dp = (Q / k)^(1/n) with k and n from the plant file",
            "stopped_units": "active power, speed and opening read exactly 0 while a unit is "
                             "stopped; these repeated zeros are not stuck sensors",
            "set_points": "units follow hourly set points and start or stop on the hour: "
                          "these persistent steps are operation, not spikes",
            "fault_lines": "'lines' are the exact file lines of the faulty cells (1-based, "
                           "preamble and header counted); long exports also give "
                           "'timestamp_block_lines', the first line of each sample's block "
                           "of rows (one row per tag)",
        },
        "units": units,
        "outages": [{"plant": o.plant, "unit": o.unit, "start": _iso(o.start),
                     "end": _iso(o.start + o.duration), "reason": o.reason,
                     "in_span": bool(o.start < end and o.start + o.duration > start)}
                    for o in OUTAGES],
        "faults": faults,
        "fault_counts": counts,
        "files": per_file,
        "signatures": [{"plant": s.plant, "unit": s.unit, "signature": s.signature,
                        "start": _iso(s.start), "end": _iso(s.end), "cause": s.cause,
                        "magnitude": dict(s.magnitude),
                        "in_span": bool(s.start < end and s.end > start)}
                       for s in SIGNATURES],
    }
