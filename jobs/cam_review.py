"""Kaplan cam check of one unit from its stored steady windows (wiring of analytics.cam)."""

from __future__ import annotations

from datetime import datetime

import numpy as np
import pandas as pd
from sqlalchemy import select
from sqlalchemy.orm import Session

from analytics.cam import CamCheck, cam_check
from analytics.runners.base import G_DEFAULT, RHO_DEFAULT
from analytics.runners.kaplan import KaplanGeometry
from ingest.plant_file import UnitSpec
from jobs.reference import runner_model
from store.models import EfficiencyWindow, Plant, Unit, UnitConfigVersion

#: Opening bands of the check (fraction): 0.1 wide, as the cam tables are usually laid out.
OPENING_BANDS = np.round(np.arange(0.2, 1.0001, 0.1), 2)
#: Width of the head bands [m] as a fraction of the rated head (common practice: a cam
#: table has a curve every few per cent of head).
HEAD_BAND_FRACTION = 0.05


class CamReviewError(ValueError):
    """The unit is not a Kaplan with a cam, or has no steady windows to check."""


def unit_cam_check(session: Session, plant_code: str, unit_code: str, *,
                   since: datetime | None = None,
                   until: datetime | None = None) -> tuple[CamCheck, UnitSpec]:
    """Run :func:`analytics.cam.cam_check` on the unit's steady windows in the period."""
    unit = session.scalar(select(Unit).join(Plant).where(Plant.code == plant_code,
                                                         Unit.code == unit_code))
    if unit is None:
        raise CamReviewError(f"no unit {plant_code}/{unit_code} in the store")
    version = session.scalar(select(UnitConfigVersion).where(UnitConfigVersion.unit_id == unit.id)
                             .order_by(UnitConfigVersion.version.desc()).limit(1))
    spec = UnitSpec.model_validate(version.config)
    if spec.runner_type != "kaplan" or spec.geometry is None or not spec.geometry.cam:
        raise CamReviewError(f"{plant_code}/{unit_code} is not a Kaplan unit with an installed "
                             "cam in its plant file")
    # only the model's geometry (its installed cam) is used here
    model = runner_model(spec, rho=RHO_DEFAULT, g=G_DEFAULT)
    geometry: KaplanGeometry = model.geometry  # type: ignore[attr-defined]
    query = select(EfficiencyWindow.opening, EfficiencyWindow.net_head,
                   EfficiencyWindow.blade_angle, EfficiencyWindow.eta_index,
                   EfficiencyWindow.eta_index_raw, EfficiencyWindow.energy_j).where(
        EfficiencyWindow.unit_id == unit.id, EfficiencyWindow.steady.is_(True),
        EfficiencyWindow.eta_index_raw.is_not(None))
    if since is not None:
        query = query.where(EfficiencyWindow.start >= since)
    if until is not None:
        query = query.where(EfficiencyWindow.start < until)
    frame = pd.DataFrame(session.execute(query).all(),
                         columns=["opening", "head", "blade", "eta", "eta_raw", "energy"])
    if frame.empty:
        raise CamReviewError(f"{plant_code}/{unit_code} has no steady windows in the period; "
                             "run `hydrodrift compute` first")
    eta = frame["eta"].fillna(frame["eta_raw"]).to_numpy(dtype=float)
    step = HEAD_BAND_FRACTION * spec.rated_head
    lo, hi = np.nanquantile(frame["head"], [0.01, 0.99])
    head_bands = np.arange(np.floor(lo / step) * step, hi + step, step)
    if head_bands.size < 2:
        head_bands = np.array([lo - step / 2, lo + step / 2])
    result = cam_check(frame["opening"].to_numpy(dtype=float),
                       frame["head"].to_numpy(dtype=float),
                       frame["blade"].to_numpy(dtype=float), eta,
                       np.maximum(frame["energy"].to_numpy(dtype=float), 0.0),
                       geometry.cam_angle, opening_bands=OPENING_BANDS, head_bands=head_bands)
    return result, spec
