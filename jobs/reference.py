"""A unit's reference: plant-file geometry -> runner model -> calibration -> stored hill chart.

The reference of a unit configuration version is built once, on first need, and stored as
a :class:`store.models.ReferenceModel` row: the fitted coefficients, the calibration's
residuals, the hill chart over the unit's head range and its best-efficiency point. Later
runs read the stored chart (cached per process), so no model is solved per sample.

Plant-file geometry maps to the analytics models as follows; what a plant file does not
give is derived and written down here:

* Francis: the plant file's radii, height and blade angles; the guide-vane throat law's
  full-opening angle defaults in :class:`analytics.runners.francis.FrancisGeometry`.
* Kaplan: tip and hub diameters, blade count, guide-vane height and radius, the installed
  cam. Blade-element angles are not in a plant file: they come from a free-vortex design
  (:func:`analytics.runners.kaplan.design_geometry`) at the rated head and
  :data:`KAPLAN_DESIGN_FLOW_FRACTION` of the rated flow, and calibration absorbs the rest.
* Pelton: pitch diameter, jets, nozzle diameter, bucket outlet angle; the unit's jet counts
  are all of 1..z (the hill chart takes the best one at each power).
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from analytics.calibration import CalibrationError, CalibrationResult, ReferenceData, calibrate
from analytics.hillchart import HillChart, build_hill_chart
from analytics.runners import francis, kaplan, pelton
from analytics.runners.base import RunnerModel
from analytics.site import atmospheric_pressure
from analytics.water import density
from hydrodrift import __version__
from ingest.plant_file import Geometry, UnitSpec
from store.models import Plant, PlantConfigVersion, ReferenceModel, Unit, UnitConfigVersion

#: Kaplan free-vortex design point (zero exit swirl) as a fraction of the rated flow, its
#: opening and assumed hydraulic efficiency: a design near full flow, so that the losses
#: growing with flow put the on-cam BEP near 80 % of rated power, where double-regulated
#: units usually have it (common practice; checked on the demo unit in tests/test_kaplan.py).
KAPLAN_DESIGN_FLOW_FRACTION = 1.06
KAPLAN_DESIGN_OPENING = 0.90
KAPLAN_DESIGN_HYDRAULIC_EFFICIENCY = 0.935
#: Blade-tip clearance assumed when a plant file gives none [m] (common practice: ~1e-3 D).
KAPLAN_TIP_CLEARANCE_PER_DIAMETER = 6.5e-4
#: Water temperature at which reference charts are solved [K]; efficiencies are
#: dimensionless and barely depend on it.
REFERENCE_WATER_TEMPERATURE = 283.15
#: Hill-chart head grid: from this fraction of the lowest to that of the highest head.
HEAD_MARGIN = (0.80, 1.20)
HEAD_POINTS = 25


class UnitReferenceError(ValueError):
    """A unit has no usable reference (no geometry, no points, or a refused fit)."""


def reference_density() -> float:
    """Water density of the reference charts [kg/m3]: IAPWS-IF97 at
    REFERENCE_WATER_TEMPERATURE and sea-level standard pressure."""
    return float(density(REFERENCE_WATER_TEMPERATURE, atmospheric_pressure(0.0)))


def estimated_rated_flow(rated_power: float, rated_head: float, rho: float, g: float) -> float:
    """Rated flow [m3/s] from ``P = rho g Q H eta_t eta_g`` with typical efficiencies
    (0.92, 0.98; common practice), for a plant file that gives none."""
    return float(rated_power / (rho * g * rated_head * 0.92 * 0.98))


def _rated_flow(spec: UnitSpec, rho: float, g: float) -> float:
    if spec.rated_flow is not None:
        return float(spec.rated_flow)
    return estimated_rated_flow(spec.rated_power, spec.rated_head, rho, g)


def runner_model(spec: UnitSpec, *, rho: float, g: float) -> RunnerModel:
    """The unit's runner model with typical coefficients (the calibration's start)."""
    if spec.geometry is None:
        raise UnitReferenceError(f"unit {spec.code}: the plant file gives no runner geometry; "
                                 "a reference model needs it (see docs/plant-file.md, "
                                 "[units.geometry])")
    return runner_model_for(spec.geometry, rated_speed=float(spec.rated_speed),
                            rated_head=float(spec.rated_head),
                            rated_flow=_rated_flow(spec, rho, g), rho=rho, g=g,
                            where=f"unit {spec.code}")


def runner_model_for(geo: Geometry, *, rated_speed: float, rated_head: float,
                     rated_flow: float, rho: float, g: float,
                     where: str = "unit") -> RunnerModel:
    """A runner model from plant-file geometry (SI) with typical coefficients.

    Parameters
    ----------
    geo : the plant file's ``[units.geometry]`` (Francis, Kaplan or Pelton)
    rated_speed : [rad/s]; rated_head : [m]; rated_flow : [m3/s] (Kaplan design point)
    rho, g : [kg/m3], [m/s2]
    """
    speed = rated_speed
    if geo.kind == "francis":
        g_f = francis.FrancisGeometry(
            inlet_radius=geo.inlet_radius, inlet_height=geo.inlet_height,
            outlet_radius=geo.outlet_radius, blade_inlet_angle=geo.blade_inlet_angle,
            blade_outlet_angle=geo.blade_outlet_angle, outlet_area=geo.outlet_area)
        coefficients = francis.design_coefficients(g_f, speed=speed, head=rated_head,
                                                   rho=rho, g=g)
        return francis.FrancisModel(g_f, coefficients)
    if geo.kind == "pelton":
        g_p = pelton.PeltonGeometry(
            pitch_diameter=geo.pitch_diameter, jet_count=geo.jet_count,
            nozzle_diameter=geo.nozzle_diameter, bucket_outlet_angle=geo.bucket_outlet_angle)
        coefficients = pelton.design_coefficients(g_p, speed=speed, head=rated_head,
                                                  rho=rho, g=g)
        return pelton.PeltonModel(g_p, coefficients)
    if geo.guide_vane_height is None or geo.guide_vane_radius is None:
        raise UnitReferenceError(f"{where}: a Kaplan reference needs guide_vane_height and "
                                 "guide_vane_radius in its geometry")
    cam = {}
    if geo.cam:
        cam = _cam_fields(geo.cam, where)
    g_k = kaplan.design_geometry(
        geo.tip_diameter, geo.hub_diameter, geo.blade_count, geo.guide_vane_height,
        geo.guide_vane_radius, design_head=rated_head,
        design_flow=KAPLAN_DESIGN_FLOW_FRACTION * rated_flow, speed=speed,
        design_opening=KAPLAN_DESIGN_OPENING,
        hydraulic_efficiency=KAPLAN_DESIGN_HYDRAULIC_EFFICIENCY, g=g,
        tip_clearance=KAPLAN_TIP_CLEARANCE_PER_DIAMETER * geo.tip_diameter, **cam)
    return kaplan.KaplanModel(g_k)


def _cam_fields(rows: tuple[tuple[float, float, float], ...], where: str) -> dict:
    """The plant file's cam rows (opening, head [m], angle [deg]) as KaplanGeometry fields."""
    table = np.array(rows, dtype=float)
    openings = np.unique(table[:, 0])
    heads = np.unique(table[:, 1])
    grid = np.full((openings.size, heads.size), np.nan)
    grid[np.searchsorted(openings, table[:, 0]),
         np.searchsorted(heads, table[:, 1])] = np.deg2rad(table[:, 2])
    if np.isnan(grid).any():
        raise UnitReferenceError(f"{where}: the cam table is not a full grid of openings "
                                 "and heads")
    return {"cam_opening": tuple(openings.tolist()), "cam_head": tuple(heads.tolist()),
            "cam_blade_angle": tuple(tuple(r) for r in grid.tolist())}


def jet_modes(spec: UnitSpec) -> list[int] | None:
    """Pelton: the jet counts the unit may run (1..z); None for other runners."""
    geo = spec.geometry
    if geo is None or geo.kind != "pelton":
        return None
    return list(range(1, geo.jet_count + 1))


def reference_data(spec: UnitSpec) -> ReferenceData:
    """The unit's reference points as calibration input."""
    points = spec.reference_points
    if len(points) == 0:
        raise UnitReferenceError(f"unit {spec.code}: the plant file gives no reference_points "
                             "(acceptance or model-test points) to calibrate against")

    def col(name: str) -> np.ndarray:
        return np.array([np.nan if getattr(p, name) is None else getattr(p, name)
                         for p in points], dtype=float)

    try:
        return ReferenceData.from_arrays(col("head"), col("efficiency"), power=col("power"),
                                         flow=col("flow"), opening=col("opening"),
                                         blade_angle=col("blade_angle"))
    except CalibrationError as exc:
        raise UnitReferenceError(f"unit {spec.code}: {exc}") from None


def head_grid(spec: UnitSpec) -> np.ndarray:
    """Heads [m] of the hill chart: the rated and reference heads, widened by HEAD_MARGIN."""
    heads = [spec.rated_head, *(p.head for p in spec.reference_points)]
    return np.linspace(HEAD_MARGIN[0] * min(heads), HEAD_MARGIN[1] * max(heads), HEAD_POINTS)


_CALIBRATIONS: dict[tuple[str, float], tuple[CalibrationResult, HillChart]] = {}


def calibrate_unit(spec: UnitSpec, *, g: float) -> tuple[CalibrationResult, HillChart]:
    """Fit the unit's model to its reference points and solve its hill chart.

    Deterministic in (configuration, gravity), so a process keeps the result for a
    configuration it has fitted before (tests and benchmarks build many databases).
    """
    key = (spec.model_dump_json(), round(g, 9))
    if key not in _CALIBRATIONS:
        _CALIBRATIONS[key] = _calibrate_unit(spec, g=g)
    return _CALIBRATIONS[key]


def _calibrate_unit(spec: UnitSpec, *, g: float) -> tuple[CalibrationResult, HillChart]:
    rho = reference_density()
    model = runner_model(spec, rho=rho, g=g)
    data = reference_data(spec)
    modes = jet_modes(spec)
    try:
        result = calibrate(model, data, speed=float(spec.rated_speed), rho=rho, g=g,
                           modes=modes, check_heads=head_grid(spec)[::4])
    except CalibrationError as exc:
        raise UnitReferenceError(f"unit {spec.code}: calibration refused: {exc}") from None
    chart = build_hill_chart(result.model, heads=head_grid(spec), speed=float(spec.rated_speed),
                             modes=modes, rho=rho, g=g)
    return result, chart


def flow_basis(session: Session, plant: Plant, unit: Unit) -> str:
    """"flow_meter" when the plant exports the unit's flow, else "winter_kennedy"."""
    config = session.scalar(select(PlantConfigVersion.config)
                            .where(PlantConfigVersion.plant_id == plant.id)
                            .order_by(PlantConfigVersion.version.desc()).limit(1)) or {}
    for mapping in (config.get("tags") or {}).values():
        if mapping.get("signal") == "flow_rate" and mapping.get("unit") in (unit.code, "*"):
            return "flow_meter"
    return "winter_kennedy"


def ensure_reference(session: Session, plant: Plant, unit: Unit, version: UnitConfigVersion,
                     spec: UnitSpec, *, gravity: float) -> tuple[ReferenceModel, bool]:
    """The reference of ``version``, calibrated and stored if it does not exist yet."""
    existing = session.scalar(select(ReferenceModel).where(
        ReferenceModel.unit_id == unit.id,
        ReferenceModel.unit_config_version == version.version))
    if existing is not None:
        return existing, False
    result, chart = calibrate_unit(spec, g=gravity)
    bep = chart.best_efficiency_point(float(spec.rated_head))
    basis = flow_basis(session, plant, unit)
    newest = session.scalar(select(ReferenceModel.version).where(
        ReferenceModel.unit_id == unit.id).order_by(ReferenceModel.version.desc()).limit(1))
    row = ReferenceModel(
        unit_id=unit.id, version=(newest or 0) + 1, unit_config_version=version.version,
        effective_from=version.effective_from, runner_type=spec.runner_type,
        coefficients={k: float(v) for k, v in result.coefficients.items()},
        calibration={
            "rms_efficiency": result.rms_efficiency,
            "max_abs_efficiency": result.max_abs_efficiency,
            "efficiency_residuals": [float(v) for v in result.efficiency_residuals],
            "fitted": list(result.fitted), "at_bounds": list(result.at_bounds),
            "points": int(result.efficiency_residuals.size),
        },
        hill_chart=chart.to_dict(),
        best_efficiency_point={"head": bep.head, "power": bep.power, "flow": bep.flow,
                               "efficiency": bep.efficiency, "opening": bep.opening},
        flow_basis=basis,
        # an absolute flow needs no index constant: the efficiency is absolute already
        index_constant=1.0 if basis == "flow_meter" else None,
        index_constant_detail={"estimator": "none: absolute flow from the flow meter"}
        if basis == "flow_meter" else {},
        code_version=__version__,
    )
    session.add(row)
    session.flush()
    return row, True


_CHARTS: dict[tuple, HillChart] = {}


def reference_chart(reference: ReferenceModel) -> HillChart:
    """The stored hill chart of ``reference`` (parsed once per process).

    The cache key holds the row's creation instant besides its id, so that two databases
    used by one process (tests, benchmarks, a migration) never share a chart.
    """
    key = (reference.id, reference.unit_id, reference.version,
           reference.created_at.isoformat() if reference.created_at else None)
    chart = _CHARTS.get(key)
    if chart is None:
        chart = HillChart.from_dict(reference.hill_chart)
        _CHARTS[key] = chart
    return chart
