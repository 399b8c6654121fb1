"""The plant registry: import plant files into the store as new versions, read them back.

Versions are append-only. Importing a file whose content (after validation, in SI) equals
the newest stored version changes nothing; a changed plant section, export format, source
list or tag map adds a plant version, and each changed unit adds a unit version. The
``effective_from`` of a new version is the file's own value when given; otherwise the
beginning of time for a first version and the import instant for later ones.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, select
from sqlalchemy.orm import Session

from ingest.plant_file import PlantFile, PlantFileError, UnitSpec, load_plant_file
from store.engine import session_scope
from store.models import Plant, PlantConfigVersion, Unit, UnitConfigVersion, utc_now

#: effective_from of a first version whose file gives none: valid for all past data.
BEGINNING = datetime(1970, 1, 1, tzinfo=UTC)


@dataclass
class ImportResult:
    """What one plant-file import did."""

    plant_code: str
    plant_created: bool
    plant_version: int
    plant_changed: bool
    unit_versions: dict[str, int] = field(default_factory=dict)  #: code -> version in force
    units_changed: list[str] = field(default_factory=list)  #: codes given a new version

    @property
    def changed(self) -> bool:
        return self.plant_created or self.plant_changed or bool(self.units_changed)

    def summary(self) -> str:
        if self.plant_created:
            head = f"plant {self.plant_code}: created (version {self.plant_version})"
        elif self.plant_changed:
            head = f"plant {self.plant_code}: new version {self.plant_version}"
        else:
            head = f"plant {self.plant_code}: unchanged (version {self.plant_version})"
        units = ", ".join(
            f"{code} v{v}{' (new)' if code in self.units_changed else ''}"
            for code, v in self.unit_versions.items()
        )
        return f"{head}; units {units}"


def _digest(payload: dict[str, Any]) -> str:
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def _plant_payload(plant_file: PlantFile) -> dict[str, Any]:
    data = plant_file.model_dump(mode="json", exclude={"units"})
    data["plant"].pop("effective_from", None)
    return data


def _unit_payload(unit: UnitSpec) -> dict[str, Any]:
    return unit.model_dump(mode="json", exclude={"effective_from"})


def import_plant(session: Session, plant_file: PlantFile, *, source_path: str) -> ImportResult:
    """Create or update a plant and its units from a validated plant file."""
    now = utc_now()
    site = plant_file.plant
    plant = session.scalar(select(Plant).where(Plant.code == site.code))
    created = plant is None
    if plant is None:
        plant = Plant(code=site.code, name=site.name, latitude_deg=site.latitude,
                      elevation_m=site.elevation, timezone=site.timezone)
        session.add(plant)
        session.flush()
    else:
        plant.name, plant.latitude_deg = site.name, site.latitude
        plant.elevation_m, plant.timezone = site.elevation, site.timezone

    payload = _plant_payload(plant_file)
    digest = _digest(payload)
    latest = session.scalar(
        select(PlantConfigVersion).where(PlantConfigVersion.plant_id == plant.id)
        .order_by(PlantConfigVersion.version.desc()).limit(1)
    )
    plant_changed = latest is None or latest.content_sha256 != digest
    plant_version = latest.version if latest is not None else 0
    if plant_changed:
        plant_version += 1
        effective = site.effective_from or (BEGINNING if latest is None else now)
        session.add(PlantConfigVersion(
            plant_id=plant.id, version=plant_version, effective_from=effective,
            imported_at=now, source_path=source_path, content_sha256=digest, config=payload,
        ))

    result = ImportResult(plant_code=site.code, plant_created=created,
                          plant_version=plant_version, plant_changed=plant_changed and not created)
    for spec in plant_file.units:
        result.unit_versions[spec.code] = _import_unit(session, plant, spec, now, result)
    return result


def _import_unit(session: Session, plant: Plant, spec: UnitSpec, now: datetime,
                 result: ImportResult) -> int:
    unit = session.scalar(select(Unit).where(Unit.plant_id == plant.id, Unit.code == spec.code))
    if unit is None:
        unit = Unit(plant_id=plant.id, code=spec.code, runner_type=spec.runner_type)
        session.add(unit)
        session.flush()
    elif unit.runner_type != spec.runner_type:
        # A runner-type change is a new machine, not a new version of the old one.
        raise PlantFileError(
            plant.code,
            [f"units (code {spec.code!r}).runner_type: stored unit is a {unit.runner_type} "
             f"unit, the file says {spec.runner_type}; give the new machine a new code"],
        )
    payload = _unit_payload(spec)
    digest = _digest(payload)
    latest = session.scalar(
        select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
        .order_by(UnitConfigVersion.version.desc()).limit(1)
    )
    if latest is not None and latest.content_sha256 == digest:
        return latest.version
    version = (latest.version if latest is not None else 0) + 1
    effective = spec.effective_from or (BEGINNING if latest is None else now)
    if latest is not None and effective < latest.effective_from:
        raise PlantFileError(
            plant.code,
            [f"units (code {spec.code!r}).effective_from: {effective.isoformat()} is before the "
             f"stored version {latest.version} ({latest.effective_from.isoformat()}); versions "
             "are append-only, so a new one must take effect later"],
        )
    session.add(UnitConfigVersion(unit_id=unit.id, version=version, effective_from=effective,
                                  imported_at=now, content_sha256=digest, config=payload))
    result.units_changed.append(spec.code)
    return version


def import_plant_file(engine: Engine, path: Path | str) -> ImportResult:
    """Validate ``path`` and import it in one transaction."""
    plant_file = load_plant_file(path)
    with session_scope(engine) as session:
        return import_plant(session, plant_file, source_path=str(Path(path).resolve()))


def stored_plant_file(session: Session, plant: Plant) -> tuple[PlantFile, int]:
    """The newest configuration of ``plant`` as a PlantFile, and its plant version number."""
    latest = session.scalar(
        select(PlantConfigVersion).where(PlantConfigVersion.plant_id == plant.id)
        .order_by(PlantConfigVersion.version.desc()).limit(1)
    )
    if latest is None:
        raise LookupError(f"plant {plant.code!r} has no configuration version")
    data = dict(latest.config)
    units = []
    for unit in plant.units:
        newest = session.scalar(
            select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
            .order_by(UnitConfigVersion.version.desc()).limit(1)
        )
        if newest is not None:
            units.append(newest.config)
    data["units"] = units
    return PlantFile.model_validate(data), latest.version


def unit_config_at(session: Session, unit: Unit, instant: datetime) -> UnitConfigVersion | None:
    """The unit configuration version in force at ``instant`` (newest effective before it)."""
    return session.scalar(
        select(UnitConfigVersion)
        .where(UnitConfigVersion.unit_id == unit.id, UnitConfigVersion.effective_from <= instant)
        .order_by(UnitConfigVersion.effective_from.desc(), UnitConfigVersion.version.desc())
        .limit(1)
    )
