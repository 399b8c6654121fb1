"""The demo's physics: each fictional unit's "as built" runner model, cam and hill chart.

The plant data of the demo fleet come from the same reference models the service
calibrates (:mod:`analytics.runners`, built from plant-file geometry by
:func:`jobs.reference.runner_model_for`), with loss coefficients that differ from the
models' typical ones by the invented :data:`AS_BUILT_FACTORS`. So the service has to find
each unit's coefficients from its acceptance-test points, as it would for a real unit.

Kaplan units: the installed cam is the as-built model's optimal blade angle at each cam
node, except where :data:`CAM_MISTUNE_DEG` sets a deliberate mistuning (invented) for the
cam check to find. The governor follows its cam with a small error (:data:`CAM_FOLLOWING`),
whose efficiency effect comes from solving the model off cam.

Everything here is invented for the demo; see :mod:`hydrodrift.demofleet.scenario`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from analytics.hillchart import HillChart, build_hill_chart
from analytics.runners.base import RunnerModel
from hydrodrift.demofleet.scenario import PLANTS, PlantDesign, UnitDesign
from ingest.plant_file import FrancisGeometry, KaplanGeometry, PeltonGeometry
from jobs import reference
from jobs.reference import runner_model_for

#: "As built" loss coefficients relative to the models' typical values (invented): every
#: machine is a little different from its design.
AS_BUILT_FACTORS: dict[str, dict[str, float]] = {
    "francis": {"friction": 1.10, "leakage": 1.30, "draft_tube": 0.85, "incidence": 1.2},
    "kaplan": {"passage_friction": 1.15, "outlet_axial": 0.9},
    "pelton": {"bucket": 1.15, "nozzle": 0.9},
}

#: Installed-cam mistuning (invented): (plant, unit) -> degrees added to the optimum at
#: openings from 0.5 up, the error of a cam re-set after a blade-servo repair.
CAM_MISTUNE_DEG: dict[tuple[str, str], float] = {("LBD", "U2"): 1.5}

#: Cam nodes written to the plant file.
CAM_OPENINGS: tuple[float, ...] = (0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0)
CAM_HEADS_M: tuple[float, ...] = (14.0, 16.0, 18.0, 20.0, 22.0)

#: Governor cam-following error: AR(1) with this standard deviation [deg] and correlation
#: per 10-minute sample (invented, of the order of a blade-servo dead band).
CAM_FOLLOWING = (0.6, 0.9)

#: Water density and gravity of the reference charts (the plant data use the site's own).
REFERENCE_G = 9.81


def _plant_of(unit: UnitDesign) -> PlantDesign:
    return next(p for p in PLANTS if unit in p.units)


def design_speed(unit: UnitDesign) -> float:
    """Synchronous speed [rad/s]."""
    return unit.rated_speed_rpm * 2.0 * math.pi / 60.0


def estimated_rated_flow(unit: UnitDesign, rho: float, g: float) -> float:
    """The rated-flow estimate the service also uses without a plant-file rated flow."""
    return reference.estimated_rated_flow(unit.rated_power_w, unit.rated_head_m, rho, g)


def _geometry(unit: UnitDesign, cam_rows: list[list[float]] | None = None):
    fields = {k: v for k, v in unit.geometry.items() if k != "cam"}
    if unit.runner_type == "francis":
        return FrancisGeometry.model_validate(fields)
    if unit.runner_type == "pelton":
        return PeltonGeometry.model_validate(fields)
    if cam_rows is not None:
        fields["cam"] = cam_rows
    return KaplanGeometry.model_validate(fields)


def _as_built(model: RunnerModel, runner_type: str) -> RunnerModel:
    factors = AS_BUILT_FACTORS[runner_type]
    return model.with_coefficients({k: model.coefficients[k] * f for k, f in factors.items()})


@dataclass(frozen=True)
class DemoUnitPhysics:
    """The as-built model of one demo unit and its hill chart (on its installed cam)."""

    model: RunnerModel
    chart: HillChart
    speed: float
    rho: float
    g: float
    cam_rows: tuple[tuple[float, float, float], ...] = ()
    modes: tuple[int, ...] | None = None


def reference_rho() -> float:
    """Water density of the reference charts [kg/m3], the service's own."""
    return reference.reference_density()


@lru_cache(maxsize=32)
def unit_physics(plant_code: str, unit_code: str) -> DemoUnitPhysics:
    """The as-built physics of a demo unit (solved once per process)."""
    plant = next(p for p in PLANTS if p.code == plant_code)
    unit = next(u for u in plant.units if u.code == unit_code)
    rho, g = reference_rho(), REFERENCE_G
    speed = design_speed(unit)
    q_est = estimated_rated_flow(unit, rho, g)
    build = {"rated_speed": speed, "rated_head": unit.rated_head_m, "rated_flow": q_est,
             "rho": rho, "g": g}
    cam_rows: tuple[tuple[float, float, float], ...] = ()
    if unit.runner_type == "kaplan":
        free = _as_built(runner_model_for(_geometry(unit), **build), "kaplan")
        yy, hh = np.meshgrid(CAM_OPENINGS, CAM_HEADS_M, indexing="ij")
        best = np.rad2deg(free.optimal_blade_angle(hh, speed, yy, rho=rho, g=g))
        offset = CAM_MISTUNE_DEG.get((plant_code, unit_code), 0.0)
        best = best + np.where(yy >= 0.5, offset, 0.0)
        cam_rows = tuple((float(o), float(h), round(float(a), 2))
                         for i, o in enumerate(CAM_OPENINGS)
                         for j, h in enumerate(CAM_HEADS_M) for a in [best[i, j]])
        model = _as_built(runner_model_for(_geometry(unit, [list(r) for r in cam_rows]),
                                           **build), "kaplan")
    else:
        model = _as_built(runner_model_for(_geometry(unit), **build), unit.runner_type)
    modes = tuple(range(1, unit.geometry["jet_count"] + 1)) \
        if unit.runner_type == "pelton" else None  # type: ignore[operator]
    heads = np.linspace(0.75 * unit.rated_head_m, 1.25 * unit.rated_head_m, 31)
    chart = build_hill_chart(model, heads=heads, speed=speed, modes=modes, rho=rho, g=g)
    return DemoUnitPhysics(model=model, chart=chart, speed=speed, rho=rho, g=g,
                           cam_rows=cam_rows, modes=modes)


def cam_angle(physics: DemoUnitPhysics, opening: NDArray, head: NDArray) -> NDArray:
    """Installed cam blade angle [rad] (Kaplan)."""
    return physics.model.geometry.cam_angle(opening, head)  # type: ignore[attr-defined]
