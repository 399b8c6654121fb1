"""The plant file: a human-edited TOML description of a plant, its units and its tag map.

The format is documented in ``docs/plant-file.md``. Quantities may be written with their
unit as a string (``rated_power = "120 MW"``) or as a bare number, which is then read in
the field's SI unit (given in brackets in each field's description). Everything is held
in SI once loaded. Errors name the file, the field path and what was expected.
"""

from __future__ import annotations

import tomllib
from datetime import UTC, datetime
from pathlib import Path
from typing import Annotated, Any, Literal
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)

from ingest.units import UnitError, linear_to_si, quantity_to_si
from store.signals import SIGNAL_BY_NAME, SIGNAL_NAMES


class PlantFileError(ValueError):
    """A plant file that cannot be read or does not validate; ``problems`` lists each."""

    def __init__(self, path: Path | str, problems: list[str]) -> None:
        self.path = str(path)
        self.problems = problems
        super().__init__(f"{path}: " + "; ".join(problems) if len(problems) == 1 else
                         f"{path}: {len(problems)} problems:\n" +
                         "\n".join(f"  - {p}" for p in problems))


def _quantity(si_unit: str) -> BeforeValidator:
    """Accept ``"120 MW"`` (converted) or a bare number (taken as ``si_unit``)."""

    def parse(value: Any) -> Any:
        if isinstance(value, str):
            try:
                return quantity_to_si(value, si_unit)
            except UnitError as exc:
                raise ValueError(f"{exc}; expected a quantity in units of {si_unit}") from exc
        return value

    return BeforeValidator(parse)


Power = Annotated[float, _quantity("W")]
Length = Annotated[float, _quantity("m")]
Speed = Annotated[float, _quantity("rad/s")]
Flow = Annotated[float, _quantity("m**3/s")]
Angle = Annotated[float, _quantity("rad")]
Area = Annotated[float, _quantity("m**2")]
Fraction = Annotated[float, _quantity("dimensionless")]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class PlantSite(_Strict):
    """The plant and its site."""

    code: str = Field(pattern=r"^[A-Za-z0-9_-]{1,32}$", description="short unique code")
    name: str = Field(min_length=1, max_length=200)
    latitude: float = Field(ge=-90, le=90, description="[deg] north positive")
    elevation: Length = Field(ge=-500, le=6000, description="[m] above sea level, powerhouse")
    timezone: str = Field(description="IANA time zone, e.g. 'Europe/Oslo'")
    effective_from: datetime | None = Field(
        default=None, description="when this version takes effect; default: at import"
    )

    @field_validator("timezone")
    @classmethod
    def _known_zone(cls, value: str) -> str:
        try:
            ZoneInfo(value)
        except (ZoneInfoNotFoundError, ValueError) as exc:
            raise ValueError(f"unknown IANA time zone {value!r}; expected e.g. 'Europe/Oslo'") \
                from exc
        return value

    @field_validator("effective_from")
    @classmethod
    def _aware(cls, value: datetime | None) -> datetime | None:
        return _require_aware(value)


def _require_aware(value: datetime | None) -> datetime | None:
    if value is not None and value.tzinfo is None:
        raise ValueError("expected a date-time with its offset, e.g. 2024-05-01T00:00:00Z")
    return value.astimezone(UTC) if value is not None else None


class ExportFormat(_Strict):
    """How the plant's SCADA or historian writes its export files."""

    layout: Literal["wide", "long"] = Field(
        description="wide: one column per tag; long: one row per timestamp and tag"
    )
    delimiter: str = Field(default=",", min_length=1, max_length=1)
    decimal: Literal[".", ","] = "."
    thousands: Literal["", ",", ".", " ", "'"] = ""
    encoding: Literal["utf-8", "utf-8-sig", "latin-1", "cp1252"] = "utf-8"
    skip_lines: int = Field(default=0, ge=0, description="preamble lines before the header")
    timestamp_column: str = "timestamp"
    timestamp_format: str = Field(
        default="ISO8601", description="'ISO8601' or a strptime format such as '%d.%m.%Y %H:%M'"
    )
    time_basis: Literal["utc", "offset", "local"] = Field(
        default="offset",
        description="utc: naive times are UTC; offset: every time carries its UTC offset; "
        "local: naive plant-local wall time, with DST",
    )
    ambiguous: Literal["infer", "earliest", "latest", "reject"] = Field(
        default="infer",
        description="local time in a DST fold: infer from file order, take the first "
        "(summer) or second (winter) instant, or reject the row",
    )
    nonexistent: Literal["reject", "shift_forward"] = Field(
        default="reject", description="local time in a DST gap: reject the row or shift it"
    )
    sentinels: tuple[float, ...] = Field(
        default=(-9999.0, -99999.0), description="exporter's 'no value' numbers"
    )
    tag_column: str = "tag"
    value_column: str = "value"
    quality_column: str | None = None
    good_quality: tuple[str, ...] = Field(
        default=("good", "g", "192", "0"),
        description="quality codes that mean good (case-insensitive); others are flagged",
    )

    @model_validator(mode="after")
    def _separators_differ(self) -> ExportFormat:
        if self.decimal == self.delimiter:
            raise ValueError(
                f"decimal {self.decimal!r} equals the delimiter; a decimal comma needs "
                "another delimiter such as ';'"
            )
        if self.thousands and self.thousands in (self.decimal, self.delimiter):
            raise ValueError(f"thousands separator {self.thousands!r} clashes with "
                             "the decimal mark or the delimiter")
        return self


class Source(_Strict):
    """A place the service pulls export files from."""

    kind: Literal["folder", "http"]
    path: str | None = Field(default=None, description="folder: the drop folder")
    pattern: str = Field(default="*.csv", description="folder: file-name glob")
    url: str | None = Field(default=None, description="http: the export's URL")
    interval: float = Field(default=300.0, gt=0, description="[s] between polls")

    @model_validator(mode="after")
    def _where(self) -> Source:
        if self.kind == "folder" and not self.path:
            raise ValueError("a folder source needs 'path'")
        if self.kind == "http" and not (self.url or "").startswith(("http://", "https://")):
            raise ValueError("an http source needs 'url' starting with http:// or https://")
        return self


class TagMapping(_Strict):
    """One export tag: which unit and canonical signal it feeds, and its unit of measure."""

    unit: str = Field(description="unit code, or '*' for a plant-wide signal (levels)")
    signal: str = Field(description="canonical signal name")
    uom: str = Field(description="unit of measure as exported, e.g. 'MW', 'ft', 'degF'")
    scale: float = Field(default=1.0, description="applied before the unit conversion")
    offset: float = Field(default=0.0, description="added after scaling, before conversion")

    @field_validator("signal")
    @classmethod
    def _known_signal(cls, value: str) -> str:
        if value not in SIGNAL_BY_NAME:
            raise ValueError(f"unknown signal {value!r}; expected one of {', '.join(SIGNAL_NAMES)}")
        return value

    def to_si(self) -> tuple[float, float]:
        """``(a, b)`` with ``si = a * raw + b`` including scale and offset."""
        a, b = linear_to_si(self.uom, SIGNAL_BY_NAME[self.signal].si_unit)
        return a * self.scale, a * self.offset + b


class EfficiencyPoint(_Strict):
    """A point of the generator efficiency curve."""

    power: Power = Field(gt=0, description="[W] active power")
    efficiency: float = Field(gt=0.5, le=1.0)


class ReferencePoint(_Strict):
    """An acceptance-, commissioning- or model-test point (stepped up) of the turbine."""

    head: Length = Field(gt=0, description="[m] net head")
    power: Power | None = Field(default=None, gt=0, description="[W] turbine shaft power")
    flow: Flow | None = Field(default=None, gt=0, description="[m3/s] discharge")
    efficiency: float = Field(gt=0.0, le=1.0, description="turbine efficiency, fraction")
    opening: Fraction | None = Field(default=None, ge=0, le=1)
    blade_angle: Angle | None = None
    source: str = Field(default="", description="where the point comes from")

    @model_validator(mode="after")
    def _power_or_flow(self) -> ReferencePoint:
        if self.power is None and self.flow is None:
            raise ValueError("a reference point needs 'power' or 'flow' (or both)")
        return self


class FrancisGeometry(_Strict):
    """Main dimensions of a Francis runner (mean-line model, see analytics)."""

    kind: Literal["francis"] = "francis"
    inlet_radius: Length = Field(gt=0, description="[m] R1")
    inlet_height: Length = Field(gt=0, description="[m] b1, guide-vane height")
    outlet_radius: Length = Field(gt=0, description="[m] R2, mean outlet radius")
    outlet_area: Area | None = Field(default=None, gt=0, description="[m2] throat area")
    blade_inlet_angle: Angle = Field(description="[rad] beta1b, from meridional")
    blade_outlet_angle: Angle = Field(description="[rad] beta2b, from meridional")
    blade_count: int | None = Field(default=None, gt=0)
    guide_vane_count: int | None = Field(default=None, gt=0)


class KaplanGeometry(_Strict):
    """Main dimensions of a Kaplan runner and its cam."""

    kind: Literal["kaplan"] = "kaplan"
    tip_diameter: Length = Field(gt=0, description="[m]")
    hub_diameter: Length = Field(gt=0, description="[m]")
    blade_count: int = Field(gt=0)
    guide_vane_height: Length | None = Field(default=None, gt=0, description="[m]")
    guide_vane_radius: Length | None = Field(default=None, gt=0, description="[m]")
    cam: tuple[tuple[float, float, float], ...] = Field(
        default=(),
        description="installed cam as (opening fraction, net head [m], blade angle [deg])",
    )

    @model_validator(mode="after")
    def _hub_inside(self) -> KaplanGeometry:
        if self.hub_diameter >= self.tip_diameter:
            raise ValueError("hub_diameter must be smaller than tip_diameter")
        return self


class PeltonGeometry(_Strict):
    """Main dimensions of a Pelton runner and its nozzles."""

    kind: Literal["pelton"] = "pelton"
    pitch_diameter: Length = Field(gt=0, description="[m] jet circle diameter")
    jet_count: int = Field(ge=1, le=6)
    nozzle_diameter: Length = Field(gt=0, description="[m] nozzle outlet at full stroke")
    bucket_outlet_angle: Angle = Field(description="[rad], a full U-turn is 180 deg")
    bucket_count: int | None = Field(default=None, gt=0)


Geometry = Annotated[
    FrancisGeometry | KaplanGeometry | PeltonGeometry, Field(discriminator="kind")
]


class SteadyOverrides(_Strict):
    """Per-unit overrides of the steady-window tolerances (analytics.steady.SteadyTolerances).

    Any field left out keeps the service default; see docs/plant-file.md for the defaults
    and where they come from.
    """

    window_s: int | None = Field(default=None, ge=60, le=86_400,
                                 description="[s] clock-aligned window length")
    power: float | None = Field(default=None, gt=0, lt=0.5,
                                description="largest |P - mean P| as a fraction of rated power")
    head: float | None = Field(default=None, gt=0, lt=0.5,
                               description="largest |H - mean H| as a fraction of mean H")
    opening: float | None = Field(default=None, gt=0, lt=0.5,
                                  description="largest |opening - mean| (fraction 0..1)")
    speed: float | None = Field(default=None, gt=0, lt=0.5,
                                description="largest |n - mean n| as a fraction of mean n")
    min_load: float | None = Field(default=None, ge=0, lt=1,
                                   description="lowest mean power, fraction of rated power")
    min_coverage: float | None = Field(default=None, gt=0, le=1,
                                       description="fewest samples, fraction of expected")
    max_gap_s: float | None = Field(default=None, gt=0, description="[s] longest sample gap")


class UnitSpec(_Strict):
    """A turbine-generator unit."""

    code: str = Field(pattern=r"^[A-Za-z0-9_-]{1,32}$")
    name: str = ""
    runner_type: Literal["francis", "kaplan", "pelton"]
    effective_from: datetime | None = Field(
        default=None, description="when this version takes effect; default: at import"
    )
    rated_power: Power = Field(gt=0, description="[W] generator rated active power")
    rated_head: Length = Field(gt=0, description="[m] rated net head")
    rated_speed: Speed = Field(gt=0, description="[rad/s] synchronous speed")
    rated_flow: Flow | None = Field(default=None, gt=0, description="[m3/s]")
    runner_diameter: Length = Field(gt=0, description="[m] reference diameter D")
    runner_reference_elevation: Length = Field(
        description="[m] runner reference elevation, same datum as the levels"
    )
    penstock_loss_coefficient: float = Field(
        default=0.0, ge=0, description="[s2/m5] head loss k_p*Q^2 from headwater to inlet"
    )
    outlet_section_area: Area | None = Field(
        default=None, gt=0,
        description="[m2] low-pressure reference section (draft-tube outlet); when given, its "
        "velocity head is taken off the net head (IEC 60041 definition of E)",
    )
    winter_kennedy_exponent: float = Field(default=0.5, ge=0.3, le=0.7)
    winter_kennedy_coefficient: float | None = Field(
        default=None, gt=0, description="[m3/s per Pa^n] k in Q = k*dp^n, if calibrated"
    )
    generator_efficiency: float | tuple[EfficiencyPoint, ...] = Field(
        default=0.98, description="constant, or a curve of points against active power"
    )
    geometry: Geometry | None = None
    reference_points: tuple[ReferencePoint, ...] = Field(default=(), max_length=10_000)
    sigma_curve: tuple[tuple[float, float], ...] = Field(
        default=(),
        description="critical Thoma sigma against load, as (turbine power / rated, sigma_c) "
        "rows from the model test; empty: a published correlation against specific speed",
    )
    steady: SteadyOverrides | None = Field(
        default=None, description="steady-window tolerances of this unit (defaults if absent)"
    )

    @field_validator("effective_from")
    @classmethod
    def _aware(cls, value: datetime | None) -> datetime | None:
        return _require_aware(value)

    @field_validator("generator_efficiency")
    @classmethod
    def _gen_eta(cls, value: float | tuple[EfficiencyPoint, ...]) -> Any:
        if isinstance(value, float) and not 0.5 < value <= 1.0:
            raise ValueError("expected a generator efficiency between 0.5 and 1")
        if isinstance(value, tuple) and len(value) < 2:
            raise ValueError("a generator efficiency curve needs at least two points")
        return value

    @model_validator(mode="after")
    def _geometry_matches(self) -> UnitSpec:
        if self.geometry is not None and self.geometry.kind != self.runner_type:
            raise ValueError(
                f"geometry is for a {self.geometry.kind} runner but runner_type is "
                f"{self.runner_type!r}"
            )
        return self


class PlantFile(_Strict):
    """A whole plant file."""

    plant: PlantSite
    export: ExportFormat
    sources: tuple[Source, ...] = ()
    units: tuple[UnitSpec, ...] = Field(min_length=1)
    tags: dict[str, TagMapping] = Field(min_length=1)

    @model_validator(mode="after")
    def _consistent(self) -> PlantFile:
        codes = [u.code for u in self.units]
        dupes = sorted({c for c in codes if codes.count(c) > 1})
        if dupes:
            raise ValueError(f"unit codes repeated: {', '.join(dupes)}")
        problems = []
        for tag, mapping in self.tags.items():
            if mapping.unit != "*" and mapping.unit not in codes:
                problems.append(
                    f"tags.{tag}.unit: unknown unit {mapping.unit!r}; expected '*' or one of "
                    f"{', '.join(codes)}"
                )
            try:
                mapping.to_si()
            except UnitError as exc:
                problems.append(f"tags.{tag}.uom: {exc} (tag {tag!r}, signal {mapping.signal})")
        if problems:
            raise ValueError("; ".join(problems))
        return self

    def unit(self, code: str) -> UnitSpec:
        """The unit with ``code``."""
        for unit in self.units:
            if unit.code == code:
                return unit
        raise KeyError(code)


def _field_path(loc: tuple[int | str, ...], data: Any) -> str:
    """``units[1].rated_power`` (with the unit's code where known) from a pydantic loc."""
    parts: list[str] = []
    node = data
    for item in loc:
        if isinstance(item, int):
            label = f"[{item}]"
            if isinstance(node, list) and item < len(node) and isinstance(node[item], dict):
                code = node[item].get("code")
                if code:
                    label = f"[{item}] (code {code!r})"
            parts.append(label)
            node = node[item] if isinstance(node, list) and item < len(node) else None
        else:
            # pydantic adds the union member's tag to the path: keep it out of the user's path
            if item in ("francis", "kaplan", "pelton", "function-before[parse(), float]"):
                continue
            parts.append(("." if parts else "") + str(item))
            node = node.get(item) if isinstance(node, dict) else None
    return "".join(parts) or "(top level)"


def parse_plant_text(text: str, path: Path | str = "<text>") -> PlantFile:
    """Validate plant-file TOML text; raise :class:`PlantFileError` naming every problem."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlantFileError(path, [f"not valid TOML: {exc}"]) from exc
    try:
        return PlantFile.model_validate(data)
    except ValidationError as exc:
        problems = []
        for error in exc.errors(include_url=False):
            where = _field_path(tuple(error["loc"]), data)
            message = error["msg"].removeprefix("Value error, ")
            if error["type"] == "missing":
                message = "required field is missing"
            elif error["type"] == "extra_forbidden":
                message = "unknown field (check its spelling against docs/plant-file.md)"
            problems.append(f"{where}: {message}")
        raise PlantFileError(path, problems) from exc


def load_plant_file(path: Path | str) -> PlantFile:
    """Read and validate a plant file from disk."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise PlantFileError(path, [f"cannot read: {exc.strerror}"]) from exc
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise PlantFileError(path, [f"line {line}: byte 0x{raw[exc.start]:02x} is not UTF-8; "
                                    "save the plant file as UTF-8"]) from exc
    return parse_plant_text(text, path)
