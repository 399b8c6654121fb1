"""Writing the demo fleet to disk: plant files (TOML), SCADA-style exports (CSV), faults.

Plant files are composed from :mod:`scenario` in each plant's own units (SI for the
European plant, US customary for the American one). Exports are written from the
simulated signals through the plant file's own tag map (``si = a*raw + b`` inverted), so
that whatever ingestion reads back is the simulation to the printed digits. Data faults
from :data:`scenario.FAULTS` are injected here and each is recorded with its file, lines,
column and UTC time.
"""

from __future__ import annotations

import itertools
import json
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from hydrodrift.demofleet.dispatch import PlantSimulation
from hydrodrift.demofleet.physics import cam_angle, unit_physics
from hydrodrift.demofleet.scenario import (
    BAD_TIMESTAMP_SECOND_RAW,
    FAULTS,
    FLEET_OWNER,
    PLANTS,
    FaultSpec,
    PlantDesign,
    UnitDesign,
)
from ingest.units import linear_to_si

_STR = np.dtypes.StringDType()


# --------------------------------------------------------------------------- numbers
def fixed_strings(values: NDArray, decimals: int, mark: str = ".") -> NDArray:
    """Format finite numbers with ``decimals`` digits and the decimal ``mark``, vectorised.

    Rounds half away from zero on the scaled value (``np.rint``: half to even). Negative
    zero prints as ``0``.
    """
    scale = 10**decimals
    scaled = np.rint(np.asarray(values, dtype=float) * scale).astype(np.int64)
    magnitude = np.abs(scaled)
    text = (magnitude // scale).astype(_STR)
    if decimals:
        fraction = np.strings.slice((magnitude % scale + scale).astype(_STR), 1, None)
        text = np.strings.add(np.strings.add(text, mark), fraction)
    negative = scaled < 0
    text[negative] = np.strings.add("-", text[negative])
    return text


def to_unit(si_value: float | NDArray, unit: str, si_unit: str) -> Any:
    """Convert from ``si_unit`` to ``unit`` with the project's registry."""
    a, b = linear_to_si(unit, si_unit)
    return (np.asarray(si_value) - b) / a if isinstance(si_value, np.ndarray) else \
        (si_value - b) / a


def quantity(si_value: float, unit: str, si_unit: str, digits: int) -> str:
    """``"59.055 ft"``: an SI value written in a plant's unit."""
    return f"{to_unit(si_value, unit, si_unit):.{digits}f} {unit}"


# --------------------------------------------------------------------------- TOML
def _toml(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        text = repr(value)
        return text if any(c in text for c in ".en") else text + ".0"
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, datetime):
        return value.strftime("%Y-%m-%dT%H:%M:%SZ")
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + "}"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")


def _physics(unit: UnitDesign):
    plant = next(p for p in PLANTS if unit in p.units)
    return unit_physics(plant.code, unit.code)


def design_generator_efficiency(unit: UnitDesign, load: float) -> float:
    """Generator efficiency of the design curve at ``load`` (fraction of rated power)."""
    xs, ys = zip(*unit.generator_curve, strict=True)
    return float(np.interp(load, xs, ys))


def design_rated_flow(unit: UnitDesign) -> float:
    """Flow at rated power and rated head of the as-built unit [m3/s]."""
    rated_turbine = unit.rated_power_w / design_generator_efficiency(unit, 1.0)
    return float(_physics(unit).chart.flow_at_power(rated_turbine, unit.rated_head_m))


def design_reference_points(unit: UnitDesign) -> list[dict[str, float]]:
    """Acceptance-test style points (SI) of the as-built unit: a load sweep at rated head,
    plus the BEP and one more load at a low and at a high head.

    Francis and Kaplan points are solved exactly at the opening that gives the load (and,
    for a Kaplan, on its installed cam); Pelton points come from the hill chart (best jet
    count at each power) and carry no opening, as a jet count is not part of a point.
    """
    physics = _physics(unit)
    chart, model = physics.chart, physics.model
    rated_turbine = unit.rated_power_w / design_generator_efficiency(unit, 1.0)
    bep = chart.best_efficiency_point(unit.rated_head_m)
    bep_load = bep.power / rated_turbine
    sweep = sorted({*unit.reference_loads, round(bep_load, 3)})
    cases = [(unit.rated_head_m, load) for load in sweep]
    low, high = unit.reference_heads_m
    for head in (low, high):
        bep_here = bep_load * (head / unit.rated_head_m) ** 1.5
        # the BEP at that head, and part load (low head) or rated power (high head)
        cases += [(head, bep_here), (head, 0.65 * bep_here if head == low else 1.0)]
    points = []
    for head, load in cases:
        h = np.array([head])
        p_max = float(chart.max_power_at(head))
        target = np.array([min(load * rated_turbine, 0.98 * p_max)])
        if unit.runner_type == "pelton":
            eta = float(chart.efficiency_at_power(target, h)[0])
            # the flow from the power balance, so that P = rho g Q H eta holds exactly
            point = {"head": head, "power": float(target[0]),
                     "flow": float(target[0] / (physics.rho * physics.g * head * eta)),
                     "efficiency": eta}
        else:
            opening = chart.opening_at_power(target, h)
            sol = model.solve(h, physics.speed, opening, rho=physics.rho, g=physics.g)
            point = {"head": head, "power": float(sol.shaft_power[0]),
                     "flow": float(sol.flow[0]), "efficiency": float(sol.efficiency[0]),
                     "opening": float(opening[0])}
            if unit.runner_type == "kaplan":
                point["blade_angle"] = float(cam_angle(physics, opening, h)[0])
        if not all(np.isfinite(v) for v in point.values()):
            raise RuntimeError(f"demo unit {unit.code}: reference point at {head} m, load "
                               f"{load:.2f} is outside its hill chart")
        points.append(point)
    return points


def plant_toml(design: PlantDesign, effective_from: datetime) -> str:
    """The plant file of ``design`` as TOML text, with comments."""
    lu = design.length_unit
    lines = [
        f"# {design.name}: {design.comment}",
        f"# Owner: {FLEET_OWNER}. Written by hydrodrift.demofleet; every number is invented",
        "# (orders of magnitude and their sources are commented in demofleet/scenario.py).",
        "",
        "[plant]",
        f"code = {_toml(design.code)}",
        f"name = {_toml(design.name)}",
        f"latitude = {_toml(design.latitude)}",
        f"elevation = {_toml(quantity(design.elevation_m, lu, 'm', 1))}",
        f"timezone = {_toml(design.timezone)}",
        f"effective_from = {_toml(effective_from)}",
        "",
        "[export]",
        f"layout = {_toml(design.layout)}",
        f"delimiter = {_toml(design.delimiter)}",
        f"decimal = {_toml(design.decimal)}",
        'encoding = "utf-8"',
        f"skip_lines = {len(design.preamble)}",
        f"timestamp_column = {_toml(design.timestamp_column)}",
        f"timestamp_format = {_toml(design.timestamp_format)}",
        f"time_basis = {_toml(design.time_basis)}",
    ]
    if design.time_basis == "local":
        lines += ['ambiguous = "infer"  # the fall-back hour appears twice, in time order',
                  'nonexistent = "reject"']
    lines.append("sentinels = [-9999.0]")
    if design.layout == "long":
        lines += [f"tag_column = {_toml(design.tag_column)}",
                  f"value_column = {_toml(design.value_column)}",
                  f"quality_column = {_toml(design.quality_column)}",
                  f"good_quality = {_toml([design.good_quality])}"]
    for unit in design.units:
        lines += ["", _unit_toml(design, unit, effective_from)]
    lines.append("")
    for tag in design.tags:
        lines += [f"[tags.{_toml(tag.tag)}]",
                  f"unit = {_toml(tag.unit)}",
                  f"signal = {_toml(tag.signal)}",
                  f"uom = {_toml(tag.uom)}", ""]
    return "\n".join(lines)


def _unit_toml(design: PlantDesign, unit: UnitDesign, effective_from: datetime) -> str:
    lu, fu = design.length_unit, design.flow_unit
    q_rated = design_rated_flow(unit)
    wk_k = q_rated / unit.wk_dp_at_rated_flow_pa**0.5
    rated_mw = unit.rated_power_w / 1e6
    lines = [
        "[[units]]",
        f"code = {_toml(unit.code)}",
        f"name = {_toml(unit.name)}",
        f"runner_type = {_toml(unit.runner_type)}",
        f"effective_from = {_toml(effective_from)}",
        f'rated_power = "{rated_mw:g} MW"',
        f"rated_head = {_toml(quantity(unit.rated_head_m, lu, 'm', 3))}",
        f'rated_speed = "{unit.rated_speed_rpm:g} rpm"  # {unit.grid_hz:g} Hz, '
        f"{unit.pole_pairs} pole pairs",
        f"# rated flow about {quantity(q_rated, fu, 'm**3/s', 3 if fu != 'cfs' else 1)} "
        "(not given: the reference model derives its design point from the ratings)",
        f"runner_diameter = {_toml(quantity(unit.runner_diameter_m, lu, 'm', 3))}",
        f"runner_reference_elevation = "
        f"{_toml(quantity(unit.runner_reference_elevation_m, lu, 'm', 3))}",
        f"penstock_loss_coefficient = {unit.penstock_loss_coefficient:.4g}  # s2/m5, "
        f"{100 * unit.penstock_loss_coefficient * q_rated**2 / unit.rated_head_m:.1f} % "
        "head loss at rated flow",
        "winter_kennedy_exponent = 0.5",
        f"winter_kennedy_coefficient = {wk_k:.6g}  # m3/s per Pa^0.5, calibrated at "
        "acceptance (fictional)",
        "generator_efficiency = [",
    ]
    for load, eta in unit.generator_curve:
        lines.append(f'  {{power = "{load * rated_mw:g} MW", efficiency = {eta}}},')
    lines += ["]", "reference_points = [  # acceptance test (fictional), turbine shaft power"]
    for p in design_reference_points(unit):
        entry = {
            "head": quantity(p["head"], lu, "m", 3),
            "power": f"{p['power'] / 1e6:.4f} MW",
            "flow": quantity(p["flow"], fu, "m**3/s", 3 if fu != "cfs" else 1),
            "efficiency": round(p["efficiency"], 4),
        }
        if "opening" in p:
            entry["opening"] = round(p["opening"], 4)
        if "blade_angle" in p:
            entry["blade_angle"] = f"{np.rad2deg(p['blade_angle']):.2f} deg"
        entry["source"] = "acceptance test (fictional)"
        lines.append(f"  {_toml(entry)},")
    lines += ["]", "", "[units.geometry]"]
    for key, value in unit.geometry.items():
        lines.append(f"{key} = {_toml(value)}")
    if unit.runner_type == "kaplan":
        lines.append("cam = [  # installed cam: (opening fraction, net head [m], blade angle "
                     "[deg])")
        lines += [f"  {_toml(list(row))}," for row in _physics(unit).cam_rows]
        lines.append("]")
    return "\n".join(lines)


# --------------------------------------------------------------------------- exports
@dataclass
class ExportResult:
    """What one plant's exports came to."""

    files: list[Path] = field(default_factory=list)
    rows: int = 0
    faults: list[dict[str, Any]] = field(default_factory=list)
    per_file: list[dict[str, Any]] = field(default_factory=list)


def _timestamps(sim: PlantSimulation) -> NDArray:
    """Export timestamp text: ISO 8601 with offset, or the plant's local wall-time format."""
    design = sim.design
    local = sim.cal.times.tz_convert(design.timezone)
    if design.timestamp_format == "ISO8601":
        wall = local.strftime("%Y-%m-%dT%H:%M:%S").to_numpy().astype(_STR)
        offset_min = ((local.tz_localize(None) - sim.cal.times.tz_localize(None))
                      .total_seconds().to_numpy() // 60).astype(int)
        sign = np.where(offset_min < 0, "-", "+")
        hh, mm = np.abs(offset_min) // 60, np.abs(offset_min) % 60
        off = np.array([f"{s}{h:02d}:{m:02d}" for s, h, m in zip(sign, hh, mm, strict=True)],
                       dtype=_STR)
        return np.strings.add(wall, off)
    return local.strftime(design.timestamp_format).to_numpy().astype(_STR)


def _month_files(sim: PlantSimulation) -> list[tuple[str, int, int]]:
    """(``YYYY-MM``, first, end) sample ranges of the plant-local months."""
    local = sim.cal.times.tz_convert(sim.design.timezone)
    key = local.year.to_numpy() * 100 + local.month.to_numpy()
    cuts = [0, *(np.flatnonzero(np.diff(key)) + 1).tolist(), len(key)]
    return [(f"{key[a] // 100:04d}-{key[a] % 100:02d}", a, b)
            for a, b in itertools.pairwise(cuts)]


def _fault_index(spec: FaultSpec, n: int) -> int:
    i = round(spec.at_fraction * (n - 1))
    return min(i, n - spec.samples - 1) if spec.kind in ("gap", "stuck") else i


def write_exports(sim: PlantSimulation, root: Path) -> ExportResult:
    """Write the plant's monthly export files under ``root/exports/<code>/`` with its faults.

    Returns
    -------
    ExportResult: the files, data rows written and each injected fault, located.
    """
    design, plant = sim.design, sim.plant
    n = len(sim.cal.times)
    tags = list(plant.tags)
    decimals = {t.tag: t.decimals for t in design.tags}
    raw = {}
    for tag, mapping in plant.tags.items():
        a, b = mapping.to_si()
        raw[tag] = (sim.measured[tag] - b) / a
    specs = [f for f in FAULTS if f.plant == design.code]
    placed: list[tuple[FaultSpec, int]] = [(f, _fault_index(f, n)) for f in specs]
    keep = np.ones(n, dtype=bool)
    # numeric faults first (before formatting)
    for f, i in placed:
        if f.kind == "spike":
            raw[f.tag][i] += f.magnitude / plant.tags[f.tag].to_si()[0]  # type: ignore[index]
        elif f.kind == "stuck":
            raw[f.tag][i:i + f.samples] = raw[f.tag][i]  # type: ignore[index]
        elif f.kind == "gap":
            keep[i:i + f.samples] = False
    cells = {tag: fixed_strings(raw[tag], decimals[tag], design.decimal) for tag in tags}
    stamps = _timestamps(sim)
    long_stamp_faults: dict[tuple[int, int], str] = {}
    for f, i in placed:
        if f.kind in ("sentinel", "text"):
            cells[f.tag][i] = f.raw  # type: ignore[index]
        elif f.kind == "bad_timestamp":
            if design.layout == "wide":
                stamps[i] = f.raw
                stamps[i + f.samples] = BAD_TIMESTAMP_SECOND_RAW
            else:
                j = tags.index(f.tag)  # type: ignore[arg-type]
                long_stamp_faults[(i, j)] = f.raw
                long_stamp_faults[(i + f.samples, j)] = BAD_TIMESTAMP_SECOND_RAW
    _check_no_overlap(placed, keep)

    out_dir = root / "exports" / design.code
    out_dir.mkdir(parents=True, exist_ok=True)
    result = ExportResult()
    header_lines = len(design.preamble) + 1
    files_by_month = _month_files(sim)
    file_of = np.empty(n, dtype=int)
    rows_of: list[NDArray] = []
    for k, (_, a, b) in enumerate(files_by_month):
        file_of[a:b] = k
        rows_of.append(np.flatnonzero(keep[a:b]) + a)
    d = design.delimiter
    if design.layout == "wide":
        body = stamps.copy()
        for tag in tags:
            body = np.strings.add(np.strings.add(body, d), cells[tag])
        header = d.join([design.timestamp_column, *tags])
    else:
        n_tags = len(tags)
        values = np.stack([cells[t] for t in tags], axis=1).ravel()
        stamp_rows = np.repeat(stamps, n_tags)
        for (i, j), text in long_stamp_faults.items():
            stamp_rows[i * n_tags + j] = text
        tag_rows = np.tile(np.array(tags, dtype=_STR), n)
        body = np.strings.add(np.strings.add(stamp_rows, d), tag_rows)
        body = np.strings.add(np.strings.add(body, d), values)
        body = np.strings.add(body, d + design.good_quality)
        header = d.join([design.timestamp_column, design.tag_column, design.value_column,
                         design.quality_column or "quality"])
    for k, (month, _, _) in enumerate(files_by_month):
        rows = rows_of[k]
        if design.layout == "long":
            n_tags = len(tags)
            rows = (rows[:, None] * n_tags + np.arange(n_tags)).ravel()
        path = out_dir / f"{design.file_prefix}_{month}.csv"
        text = "\n".join([*design.preamble, header, *body[rows].tolist()]) + "\n"
        path.write_bytes(text.encode("utf-8"))
        result.files.append(path)
        result.rows += rows.size
        result.per_file.append({"file": path.relative_to(root).as_posix(),
                                "data_rows": int(rows.size), "first_line": header_lines + 1})

    def locate(i: int, tag: str | None) -> tuple[str, int]:
        k = int(file_of[i])
        position = int(np.searchsorted(rows_of[k], i))
        if design.layout == "long":
            position = position * len(tags) + tags.index(tag)  # type: ignore[arg-type]
        return result.per_file[k]["file"], header_lines + 1 + position

    def block_line(i: int) -> int:
        """Long layout: first line of the block of rows that share sample ``i``'s time."""
        k = int(file_of[i])
        return header_lines + 1 + int(np.searchsorted(rows_of[k], i)) * len(tags)

    times = sim.cal.times
    for number, (f, i) in enumerate(placed, start=1):
        iso = _iso(times[i])
        entry: dict[str, Any] = {"id": f"{design.code}-F{number:02d}", "kind": f.kind,
                                 "plant": design.code}
        if f.tag is not None and (f.kind != "bad_timestamp" or design.layout == "long"):
            mapping = plant.tags[f.tag]  # type: ignore[index]
            entry.update(tag=f.tag, unit=mapping.unit, signal=mapping.signal)
        if f.kind in ("sentinel", "text", "spike"):
            file, line = locate(i, f.tag)
            entry.update(file=file, lines=[line], column=f.tag if design.layout == "wide"
                         else design.value_column, time_utc=iso, cells=1)
            if f.kind == "spike":
                entry["magnitude_si"] = f.magnitude
            else:
                entry["raw"] = f.raw
        elif f.kind == "stuck":
            located = [locate(i + s, f.tag) for s in range(f.samples)]
            entry.update(file=located[0][0], lines=[ln for _, ln in located],
                         first_time_utc=iso, last_time_utc=_iso(times[i + f.samples - 1]),
                         cells=f.samples, column=f.tag if design.layout == "wide"
                         else design.value_column,
                         raw=str(cells[f.tag][i]))  # type: ignore[index]
        elif f.kind == "gap":
            k = int(file_of[i])
            before = rows_of[k][rows_of[k] < i]
            entry.update(file=result.per_file[k]["file"], rows_absent=f.samples,
                         first_time_utc=iso, last_time_utc=_iso(times[i + f.samples - 1]),
                         after_line=header_lines + before.size)
        elif f.kind == "bad_timestamp":
            located = [locate(i, f.tag), locate(i + f.samples, f.tag)]
            entry.update(file=located[0][0], lines=[ln for _, ln in located],
                         times_utc=[iso, _iso(times[i + f.samples])], rows=2,
                         raw=[f.raw, BAD_TIMESTAMP_SECOND_RAW])
            if located[0][0] != located[1][0]:
                raise RuntimeError("bad_timestamp rows fell in two files; move the fault")
        if design.layout == "long" and "lines" in entry:
            samples = [i, i + f.samples] if f.kind == "bad_timestamp" else \
                [i + s for s in range(len(entry["lines"]))]
            entry["timestamp_block_lines"] = [block_line(s) for s in samples]
        result.faults.append(entry)
    return result


def _iso(ts: Any) -> str:
    return ts.strftime("%Y-%m-%dT%H:%M:%SZ")


def _check_no_overlap(placed: list[tuple[FaultSpec, int]], keep: NDArray) -> None:
    """Faults must not touch the same cells, nor fall into the gap."""
    taken: set[tuple[int, str | None]] = set()
    for f, i in placed:
        span = range(i, i + (f.samples if f.kind in ("stuck", "gap") else 1))
        cells = [(s, None if f.kind == "gap" else f.tag) for s in span]
        if f.kind == "bad_timestamp":
            cells = [(i, f.tag), (i + f.samples, f.tag)]
        if f.kind != "gap" and not all(keep[s] for s, _ in cells):
            raise RuntimeError(f"fault {f} falls into the gap; move it")
        if any(c in taken for c in cells):
            raise RuntimeError(f"fault {f} overlaps another; move it")
        taken.update(cells)
