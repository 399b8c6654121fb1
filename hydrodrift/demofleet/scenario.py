"""The fictional demo fleet: its plants, units, tags and the ground truth planted in its data.

Everything in this module is INVENTED for the demo. The owner, both plants, their places and
every number below are fictional; any likeness to a real plant or company is accidental.
The orders of magnitude are meant to be plausible, and each comment says where it comes
from ("textbook range", "from memory", "common practice" or plainly "invented").

Values are held in SI units (W, m, m3/s, Pa, rad/s, K, s); the plant files and exports
are written in each plant's own units by :mod:`hydrodrift.demofleet.exports`.

Ground truth
------------
:data:`CONDITIONS` says which unit degrades, how and when; :data:`FAULTS` lists the data
faults injected into the exports (their exact timestamps and file lines are resolved at
generation and written to ``truth.json``); :data:`OUTAGES` lists planned outages (not
faults); :data:`SIGNATURES` lists the condition-monitoring episodes (cavitation, a
part-load vortex rope, a bearing fault) planted on named units at stated UTC times, each
copied to ``truth.json["signatures"]``. GLF MG1 and MG3 carry no signature at all, and no
signature sits on the drifting units (LBD U3, GLF MG2) or in any unit's first 8 weeks.

The demo shows what a monitoring service would flag; in a real plant such flags call for
inspection by qualified staff, and local codes and licensed practice prevail.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from typing import Literal

#: The fictional fleet owner.
FLEET_OWNER = "Quillmere Hydro Demo Cooperative (fictional)"

#: Fixed start of the demo span, independent of today's date (a Monday).
DEFAULT_START = datetime(2025, 12, 1, tzinfo=UTC)

#: Sample interval of every export [s].
SAMPLE_SECONDS = 600

#: Smallest span generate_demo accepts [days]: the fault schedule needs room.
MIN_DAYS = 3

RunnerType = Literal["francis", "kaplan", "pelton"]


@dataclass(frozen=True)
class UnitDesign:
    """One fictional turbine-generator unit, in SI units.

    ``geometry`` holds the plant-file geometry table as TOML-ready strings (with units).
    Parameters the plant-file schema has no field for (opening law, vibration and bearing
    levels, minimum load) are the generator's own and appear only here.
    """

    code: str
    name: str
    runner_type: RunnerType
    rated_power_w: float  # generator active power at rating
    rated_head_m: float  # rated net head
    pole_pairs: int
    grid_hz: float
    runner_diameter_m: float
    runner_reference_elevation_m: float
    penstock_loss_coefficient: float  # [s2/m5]
    wk_dp_at_rated_flow_pa: float  # sets the Winter-Kennedy k
    generator_curve: tuple[tuple[float, float], ...]  # (P / P_rated, eta_gen)
    min_load: float  # lowest dispatched load, fraction of rated power
    outlet_area_m2: float  # draft-tube cone area for its pressure (0: no draft tube)
    geometry: dict[str, object]
    reference_heads_m: tuple[float, float]  # low and high head of the extra test points
    reference_loads: tuple[float, ...]  # turbine power / rated turbine power, rated head
    flow_meter: bool = False
    shaft_vibration_m: float = 40e-6  # p-p displacement, smooth running
    rough_zone_vibration_m: float = 30e-6  # extra p-p in the part-load rough zone
    bearing_vibration_m_s: float = 1.2e-3  # RMS velocity, smooth running
    rough_zone_load: float = 0.5  # load fraction where the rough zone peaks
    guide_bearing_rise_k: tuple[float, float] = (20.0, 6.0)  # (running, per unit load)
    thrust_bearing_rise_k: tuple[float, float] = (26.0, 10.0)
    # High-frequency (cavitation-band) RMS acceleration of the healthy unit at rated load
    # [m/s2]; it scales as (0.35 + 0.65 load) (invented levels and law).
    hf_vibration_m_s2: float = 1.0
    # Draft-tube pressure pulsation, peak to peak, as a fraction of rho g H (net head):
    # (base, part-load hump, load of the hump's peak); the hump is a Gaussian of width
    # 0.12 in load. Healthy levels, with the draft tube's air admission working (invented).
    pulsation_of_head: tuple[float, float, float] = (0.003, 0.004, 0.35)

    @property
    def rated_speed_rpm(self) -> float:
        """Synchronous speed n = 60 f / p [rpm]."""
        return 60.0 * self.grid_hz / self.pole_pairs


@dataclass(frozen=True)
class TagDesign:
    """One export tag: which unit and signal it carries, its unit of measure and digits."""

    tag: str
    unit: str  # unit code or "*"
    signal: str
    uom: str
    decimals: int


@dataclass(frozen=True)
class PlantDesign:
    """One fictional plant and how its SCADA exports."""

    code: str
    name: str
    comment: str
    timezone: str
    latitude: float
    elevation_m: float
    grid_hz: float
    length_unit: str  # how the plant file writes lengths ("m" or "ft")
    flow_unit: str  # and flows ("m**3/s" or "cfs")
    layout: Literal["wide", "long"]
    delimiter: str
    decimal: Literal[".", ","]
    time_basis: Literal["offset", "local"]
    timestamp_column: str
    timestamp_format: str  # strftime for the exporter ("ISO8601" means isoformat with offset)
    preamble: tuple[str, ...]  # lines before the header
    file_prefix: str
    units: tuple[UnitDesign, ...]
    tags: tuple[TagDesign, ...] = field(default=())
    tag_column: str = "tag"
    value_column: str = "value"
    quality_column: str | None = None
    good_quality: str = "192"


# --------------------------------------------------------------------------- Glimmerfels
# A FICTIONAL high-head storage plant in the Alps: one reservoir (full supply 2004.5 m a.s.l.),
# powerhouse at 1480 m a.s.l., about 500 m net head for all four units. Two Francis and two
# six-jet vertical Pelton units share the head; 500 m is where both runner types are built
# (textbook ranges: Francis up to ~700 m, Pelton from ~300 m up).
#
# Francis MG1/MG2, 80 MW at 500 m, 750 rpm (50 Hz, 4 pole pairs):
#   Q_rated ~ 17.9 m3/s; n_q = n Q^0.5 / H^0.75 = 750 * 4.23 / 105.7 ~ 30 (low-n_q Francis,
#   textbook range 20-120). Diameters from the de Siervo & de Leva correlations as recalled
#   (from memory): k_u3 = 0.31 + 2.5e-3 n_s with n_s ~ 3.65 n_q ~ 110, so U3 ~ 0.58 sqrt(2gH)
#   ~ 58 m/s and D3 ~ 1.47 m; D1/D3 = 0.4 + 94.5/n_s ~ 1.26, D1 ~ 1.86 m.
#   n11 = n D3 / sqrt(H) ~ 49, Q11 ~ 0.37 m3/s: plausible for a low-n_q Francis (from memory).
#   Submergence: Thoma sigma_c ~ 0.04-0.05 at n_q 30 (from memory) needs H_s <~ -12 m at
#   8.6 m of atmospheric head at 1480 m; the runner sits 15 m below mean tailwater.
# Pelton MG3/MG4, 40 MW at 500 m, 600 rpm (5 pole pairs), 6 jets:
#   c1 = 0.98 sqrt(2gH) ~ 97 m/s, U/c1 ~ 0.47 (textbook optimum 0.46-0.48) -> U ~ 45.6 m/s,
#   pitch diameter D ~ 1.45 m; Q_jet ~ 1.54 m3/s, jet d ~ 0.14 m, D/d ~ 10 (textbook 10-20);
#   n_q per jet = 600 * 1.24 / 105.7 ~ 7 (textbook 5-25); buckets z ~ 15 + D/(2d) ~ 20
#   (rule of thumb, from memory). Jet axis 3.5 m above mean tailwater.

_FRANCIS_GEOMETRY: dict[str, object] = {
    "kind": "francis",
    "inlet_radius": "0.930 m",  # D1/2 from the correlation above
    "inlet_height": "0.160 m",  # b1/D1 ~ 0.09 at n_s ~ 110 (textbook chart, from memory)
    "outlet_radius": "0.560 m",  # mean (rms) radius of the outlet edge, hub ~0.3 m
    "outlet_area": "1.70 m**2",  # pi/4 D3^2
    # Inlet: Y = 0.95 gH = U1 c_theta1 gives c_theta1 ~ 64 m/s vs U1 ~ 73 m/s and c_m1 ~ 19 m/s,
    # so beta1 ~ atan((64-73)/19) ~ -26 deg from meridional (see domain.md's convention).
    "blade_inlet_angle": "-26.0 deg",
    # Outlet, swirl-free at BEP: w_theta2 = -U2 = -44 m/s, c_m2 ~ 10.5 m/s -> -76.6 deg.
    "blade_outlet_angle": "-76.6 deg",
    "blade_count": 17,  # 15-19 common for high-head Francis (from memory)
    "guide_vane_count": 20,
}

_PELTON_GEOMETRY: dict[str, object] = {
    "kind": "pelton",
    "pitch_diameter": "1.450 m",
    "jet_count": 6,
    "nozzle_diameter": "0.150 m",  # jet diameter at full stroke, ~6 % above the rated jet
    "bucket_outlet_angle": "165 deg",  # 180 deg = full U-turn; 160-170 common (from memory)
    "bucket_count": 20,
}


def _francis(code: str, name: str, *, flow_meter: bool) -> UnitDesign:
    return UnitDesign(
        code=code, name=name, runner_type="francis",
        rated_power_w=80e6, rated_head_m=500.0, pole_pairs=4, grid_hz=50.0,
        runner_diameter_m=1.47,  # D3, the IEC 60193 reference diameter of a Francis runner
        runner_reference_elevation_m=1463.0,
        # 0.045 s2/m5 * 17.9^2 = 14.4 m, 2.9 % of 500 m at full flow (a few % is common practice)
        penstock_loss_coefficient=0.045,
        wk_dp_at_rated_flow_pa=160e3,  # spiral-case WK taps: ~0.03 rho g H (invented)
        # 80 MW air-cooled generator: 98.3 % at rating, falling at part load (textbook range
        # 0.96-0.985 for large machines)
        generator_curve=((0.25, 0.962), (0.5, 0.976), (0.75, 0.981), (1.0, 0.983), (1.1, 0.982)),
        min_load=0.40,  # rough zone below ~40 % load is avoided (common practice)
        outlet_area_m2=1.70,
        geometry=_FRANCIS_GEOMETRY,
        reference_heads_m=(478.0, 522.0),
        reference_loads=(0.40, 0.50, 0.60, 0.70, 0.80, 0.95, 1.00, 1.05),
        flow_meter=flow_meter,
        shaft_vibration_m=38e-6, rough_zone_vibration_m=45e-6, bearing_vibration_m_s=1.3e-3,
        rough_zone_load=0.50,
        guide_bearing_rise_k=(22.0, 8.0), thrust_bearing_rise_k=(28.0, 10.0),
        # high-head Francis: ~1.6 m/s2 HF at rating; pulsation 0.2 % of rho g H plus a
        # part-load hump of 0.5 % at half load (invented; both scale with the 500 m head)
        hf_vibration_m_s2=1.6, pulsation_of_head=(0.002, 0.005, 0.50),
    )


def _pelton(code: str, name: str) -> UnitDesign:
    return UnitDesign(
        code=code, name=name, runner_type="pelton",
        rated_power_w=40e6, rated_head_m=500.0, pole_pairs=5, grid_hz=50.0,
        runner_diameter_m=1.45,  # pitch (jet circle) diameter
        runner_reference_elevation_m=1481.5,  # jet-circle plane: Pelton net head refers to it
        penstock_loss_coefficient=0.17,  # 0.17 * 9.25^2 = 14.5 m, 2.9 % at full flow
        wk_dp_at_rated_flow_pa=90e3,  # bend taps in the distributor used as the flow index
        generator_curve=((0.25, 0.958), (0.5, 0.973), (0.75, 0.979), (1.0, 0.981), (1.1, 0.980)),
        min_load=0.12,
        outlet_area_m2=0.0,  # no draft tube
        geometry=_PELTON_GEOMETRY,
        reference_heads_m=(478.0, 522.0),
        reference_loads=(0.15, 0.25, 0.40, 0.55, 0.85, 1.00, 1.05),
        shaft_vibration_m=25e-6, rough_zone_vibration_m=5e-6, bearing_vibration_m_s=0.9e-3,
        rough_zone_load=0.2,
        guide_bearing_rise_k=(20.0, 5.0), thrust_bearing_rise_k=(22.0, 6.0),
        # jets striking the buckets make a Pelton HF-rich even when healthy (invented level);
        # no draft tube, so no pulsation
        hf_vibration_m_s2=2.4, pulsation_of_head=(0.0, 0.0, 0.0),
    )


def _glimmerfels_tags(units: tuple[UnitDesign, ...]) -> tuple[TagDesign, ...]:
    tags = [
        TagDesign("GLF/OW/H", "*", "headwater_level", "m", 3),  # Oberwasser, m a.s.l.
        TagDesign("GLF/UW/H", "*", "tailwater_level", "m", 3),  # Unterwasser
    ]
    for u in units:
        p = f"GLF/{u.code}/"
        tags += [
            TagDesign(p + "P", u.code, "active_power", "MW", 3),
            TagDesign(p + "WK_DP", u.code, "wk_differential_pressure", "kPa", 2),
            TagDesign(p + "Y", u.code, "gate_opening", "percent", 2),
            TagDesign(p + "N", u.code, "rotational_speed", "rpm", 2),
        ]
        if u.outlet_area_m2 > 0:
            tags.append(TagDesign(p + "P_SR", u.code, "draft_tube_pressure", "kPa", 2))
            # Saugrohr-Druckpulsation, peak to peak (Spitze-Spitze)
            tags.append(TagDesign(p + "P_SR_PULS", u.code, "draft_tube_pulsation", "kPa", 3))
        tags += [
            TagDesign(p + "VIB_WELLE", u.code, "shaft_vibration", "um", 1),
            TagDesign(p + "VIB_LAGER", u.code, "bearing_vibration", "mm/s", 3),
            # cavitation-band acceleration, RMS
            TagDesign(p + "VIB_HF", u.code, "hf_vibration", "m/s**2", 3),
            TagDesign(p + "T_FL", u.code, "guide_bearing_temperature", "degC", 2),
            TagDesign(p + "T_SL", u.code, "thrust_bearing_temperature", "degC", 2),
            TagDesign(p + "T_KW", u.code, "cooling_water_temperature", "degC", 2),
            TagDesign(p + "T_W", u.code, "water_temperature", "degC", 2),
        ]
        if u.flow_meter:
            tags.append(TagDesign(p + "Q", u.code, "flow_rate", "m**3/s", 3))
    return tuple(tags)


_GLF_UNITS = (
    _francis("MG1", "Maschine 1 (Francis)", flow_meter=True),
    _francis("MG2", "Maschine 2 (Francis)", flow_meter=False),
    _pelton("MG3", "Maschine 3 (Pelton)"),
    _pelton("MG4", "Maschine 4 (Pelton)"),
)

GLIMMERFELS = PlantDesign(
    code="GLF",
    name="Glimmerfels (fictional demo plant)",
    comment="FICTIONAL high-head storage plant of a fictional owner; demo data only.",
    timezone="Europe/Zurich", latitude=46.55, elevation_m=1480.0, grid_hz=50.0,
    length_unit="m", flow_unit="m**3/s",
    layout="wide", delimiter=";", decimal=",", time_basis="offset",
    timestamp_column="Zeitstempel", timestamp_format="ISO8601",
    preamble=("Kraftwerk Glimmerfels – 10-Minuten-Mittelwerte (fiktive Demo-Daten)",),
    file_prefix="glimmerfels",
    units=_GLF_UNITS,
    tags=_glimmerfels_tags(_GLF_UNITS),
)


# --------------------------------------------------------------------------- Lantern Bend
# A FICTIONAL low-head run-of-river plant on a Midwestern-style river: normal pool 182.0 m
# (597 ft), three vertical Kaplan units of 30 MW at 18 m rated net head, 60 Hz.
#   Q_rated ~ 190 m3/s; 112.5 rpm (32 pole pairs); n_q = 112.5 * 13.8 / 18^0.75 ~ 177
#   (Kaplan textbook range ~100-300). Tip speed ~ 1.9 sqrt(2gH) ~ 36 m/s (k_u ~1.5-2.2 at this
#   n_q, from memory) -> D ~ 6.1 m; n11 ~ 162, Q11 ~ 1.2 m3/s (Kaplan n11 ~ 140-180, from
#   memory). Hub ratio 0.41 and 5 blades at ~18 m (textbook: 4-5 blades up to ~25 m).
#   Submergence: Thoma sigma_c ~ 0.5-0.6 at n_q ~ 180 (from memory); the blade axis sits 4 m
#   below tailwater at rated flow, sigma_plant ~ (10.2 - 0.2 + 4) / 18 ~ 0.78.

_KAPLAN_GEOMETRY: dict[str, object] = {
    "kind": "kaplan",
    "tip_diameter": "20.01 ft",  # 6.10 m
    "hub_diameter": "8.20 ft",  # 2.50 m
    "blade_count": 5,
    "guide_vane_height": "7.87 ft",  # 2.40 m, b0/D ~ 0.4 (textbook ~0.35-0.45)
    "guide_vane_radius": "13.12 ft",  # 4.00 m
}

def _kaplan(code: str, name: str) -> UnitDesign:
    geometry = dict(_KAPLAN_GEOMETRY)  # the installed cam comes from demofleet.physics
    return UnitDesign(
        code=code, name=name, runner_type="kaplan",
        rated_power_w=30e6, rated_head_m=18.0, pole_pairs=32, grid_hz=60.0,
        runner_diameter_m=6.10,
        runner_reference_elevation_m=159.5,  # blade axis
        penstock_loss_coefficient=1.1e-5,  # intake + trash rack: 1.1e-5 * 190^2 = 0.40 m, 2.2 %
        wk_dp_at_rated_flow_pa=30e3,  # semi-spiral case taps (invented)
        generator_curve=((0.25, 0.955), (0.5, 0.971), (0.75, 0.977), (1.0, 0.979), (1.1, 0.978)),
        min_load=0.20,
        outlet_area_m2=24.3,  # pi/4 (D^2 - d_hub^2)
        geometry=geometry,
        reference_heads_m=(15.0, 20.5),
        reference_loads=(0.25, 0.35, 0.50, 0.65, 0.90, 1.00),
        shaft_vibration_m=70e-6, rough_zone_vibration_m=20e-6, bearing_vibration_m_s=1.5e-3,
        rough_zone_load=0.30,
        guide_bearing_rise_k=(18.0, 6.0), thrust_bearing_rise_k=(30.0, 12.0),
        # on its cam a Kaplan leaves little swirl: a weak part-load hump near its rough zone
        # (invented levels)
        hf_vibration_m_s2=0.9, pulsation_of_head=(0.003, 0.004, 0.30),
    )


def _lantern_tags(units: tuple[UnitDesign, ...]) -> tuple[TagDesign, ...]:
    tags = [
        TagDesign("LBD.FB.ELEV.FT", "*", "headwater_level", "ft", 3),  # forebay
        TagDesign("LBD.TW.ELEV.FT", "*", "tailwater_level", "ft", 3),
    ]
    for u in units:
        p = f"LBD.{u.code}."
        tags += [
            TagDesign(p + "GEN.MW", u.code, "active_power", "MW", 3),
            TagDesign(p + "WK.PSI", u.code, "wk_differential_pressure", "psi", 4),
            TagDesign(p + "WG.PCT", u.code, "gate_opening", "percent", 2),
            TagDesign(p + "BLADE.DEG", u.code, "blade_angle", "deg", 2),
            TagDesign(p + "SPEED.RPM", u.code, "rotational_speed", "rpm", 3),
            TagDesign(p + "DT.PSI", u.code, "draft_tube_pressure", "psi", 3),
            # draft-tube pulsation, peak to peak, in psi
            TagDesign(p + "DT.PULS.PSI", u.code, "draft_tube_pulsation", "psi", 4),
            TagDesign(p + "SHAFT.MILS", u.code, "shaft_vibration", "mil_length", 3),
            TagDesign(p + "BRG.IPS", u.code, "bearing_vibration", "in/s", 5),
            # cavitation-band acceleration, RMS, in standard gravities (pint's "g_n":
            # 9.80665 m/s2; a bare "g" would be the gram)
            TagDesign(p + "HFVIB.G", u.code, "hf_vibration", "g_n", 4),
            TagDesign(p + "TGB.DEGF", u.code, "guide_bearing_temperature", "degF", 2),
            TagDesign(p + "THR.DEGF", u.code, "thrust_bearing_temperature", "degF", 2),
            TagDesign(p + "CW.DEGF", u.code, "cooling_water_temperature", "degF", 2),
            TagDesign(p + "WTR.DEGF", u.code, "water_temperature", "degF", 2),
        ]
    return tuple(tags)


_LBD_UNITS = (_kaplan("U1", "Unit 1 (Kaplan)"), _kaplan("U2", "Unit 2 (Kaplan)"),
              _kaplan("U3", "Unit 3 (Kaplan)"))

LANTERN_BEND = PlantDesign(
    code="LBD",
    name="Lantern Bend (fictional demo plant)",
    comment="FICTIONAL low-head run-of-river plant of a fictional owner; demo data only.",
    timezone="America/Chicago", latitude=41.3, elevation_m=183.0, grid_hz=60.0,
    length_unit="ft", flow_unit="cfs",
    layout="long", delimiter=",", decimal=".", time_basis="local",
    timestamp_column="Time", timestamp_format="%m/%d/%Y %H:%M",
    preamble=(),
    file_prefix="lantern_bend",
    units=_LBD_UNITS,
    tags=_lantern_tags(_LBD_UNITS),
    tag_column="Tag", value_column="Value", quality_column="Quality", good_quality="GOOD",
)

PLANTS: tuple[PlantDesign, ...] = (GLIMMERFELS, LANTERN_BEND)


# --------------------------------------------------------------------------- ground truth
@dataclass(frozen=True)
class Condition:
    """How a unit's turbine efficiency departs from its reference model.

    ``kind`` "gradual": loses ``rate_points_per_year`` efficiency points per year from
    ``since``; "step": loses ``step_points`` at ``since`` and stays there.
    """

    plant: str
    unit: str
    kind: Literal["gradual", "step"]
    since: datetime
    cause: str
    rate_points_per_year: float = 0.0
    step_points: float = 0.0


#: Year length for the gradual rate [s] (Julian year).
YEAR_SECONDS = 365.25 * 86400.0

#: The two degrading units; every other unit is healthy over the whole span.
CONDITIONS: tuple[Condition, ...] = (
    Condition("LBD", "U3", "gradual", DEFAULT_START,
              "runner blade cavitation erosion and discharge-ring wear (invented)",
              rate_points_per_year=1.5),
    Condition("GLF", "MG2", "step", datetime(2026, 6, 1, 10, 0, tzinfo=UTC),
              "runner seal-ring (labyrinth) failure: leakage bypasses the runner (invented)",
              step_points=2.0),
)


@dataclass(frozen=True)
class Outage:
    """A planned outage: the unit is stopped and unavailable (not a data fault)."""

    plant: str
    unit: str
    start: datetime
    duration: timedelta
    reason: str


OUTAGES: tuple[Outage, ...] = (
    Outage("GLF", "MG4", datetime(2026, 8, 17, 6, 0, tzinfo=UTC), timedelta(days=5),
           "annual inspection of nozzles and buckets (invented)"),
    Outage("LBD", "U1", datetime(2026, 9, 14, 13, 0, tzinfo=UTC), timedelta(days=6),
           "trash-rack and wicket-gate inspection (invented)"),
)

FaultKind = Literal["sentinel", "text", "spike", "stuck", "gap", "bad_timestamp"]


@dataclass(frozen=True)
class FaultSpec:
    """A data fault to inject, placed at a fraction of the span so every span has it.

    ``tag`` is the export tag (None for row faults: gap, bad_timestamp); ``samples`` is the
    length of a stuck run or gap (or, for bad_timestamp, the offset of the second row in
    samples); ``magnitude`` is the SI amount added by a spike; ``raw`` is the text written.
    """

    kind: FaultKind
    plant: str
    at_fraction: float
    tag: str | None = None
    samples: int = 1
    magnitude: float = 0.0
    raw: str = ""


FAULTS: tuple[FaultSpec, ...] = (
    # Glimmerfels, wide export
    FaultSpec("sentinel", "GLF", 0.11, tag="GLF/MG1/T_FL", raw="-9999"),
    FaultSpec("spike", "GLF", 0.19, tag="GLF/MG1/WK_DP", magnitude=60e3),  # +60 kPa
    FaultSpec("gap", "GLF", 0.37, samples=30),  # 5 h of rows absent
    FaultSpec("sentinel", "GLF", 0.47, tag="GLF/MG3/P", raw="-9999"),
    FaultSpec("spike", "GLF", 0.53, tag="GLF/MG2/T_FL", magnitude=30.0),  # +30 K
    FaultSpec("text", "GLF", 0.61, tag="GLF/MG2/VIB_LAGER", raw="n/a"),
    FaultSpec("sentinel", "GLF", 0.78, tag="GLF/UW/H", raw="-9999"),
    FaultSpec("spike", "GLF", 0.88, tag="GLF/MG4/VIB_WELLE", magnitude=250e-6),  # +250 um
    # Lantern Bend, long export in local time
    # 7 h flat line: 42 identical samples spanning 6 h 50 min, clear of a 6-h threshold
    FaultSpec("stuck", "LBD", 0.24, tag="LBD.TW.ELEV.FT", samples=42),
    FaultSpec("sentinel", "LBD", 0.33, tag="LBD.U2.WK.PSI", raw="-9999"),
    FaultSpec("bad_timestamp", "LBD", 0.57, tag="LBD.U1.GEN.MW", samples=25,
              raw="13/32/2026 25:70"),
    FaultSpec("text", "LBD", 0.69, tag="LBD.U1.TGB.DEGF", raw="n/a"),
)

#: Second garbled timestamp text of the bad_timestamp fault (written 25 samples later).
BAD_TIMESTAMP_SECOND_RAW = "##########"

SignatureKind = Literal["cavitation", "vortex_rope", "bearing"]


@dataclass(frozen=True)
class Signature:
    """A condition-monitoring episode planted on one unit over ``[start, end)`` (UTC).

    ``magnitude`` holds the episode's parameters in SI units (fractions are of rated power
    for loads, of rho g H for pulsations); the generator reads them from here, so this is
    the declarative source of ``truth.json["signatures"]``. What each kind plants:

    - ``cavitation``: the plant's tailwater is drawn down by ``tailwater_drawdown_m``
      (linear ramps of ``drawdown_ramp_s`` inside the period), the unit is held at
      ``unit_load_min_fraction`` .. ``unit_load_max_fraction`` of rating while the other
      units stay below ``other_units_load_max_fraction`` (0: they stand by, so no other
      unit runs at the low sigma); its intensity is the drawdown's
      share times a ramp in load from ``onset_load_fraction`` (0) to ``full_load_fraction``
      (1). HF vibration rises by ``hf_vibration_rise_m_s2`` and turbine efficiency falls by
      ``efficiency_deficit_fraction`` times the intensity.
    - ``vortex_rope``: the unit is held at part load (same two load keys) with its draft-tube
      air admission out of service; the pulsation (peak to peak) rises by
      ``pulsation_rise_of_head`` x rho g H times a Gaussian in load centred on
      ``rope_load_fraction``, of width ``rope_load_width_fraction``.
    - ``bearing``: the guide-bearing temperature rise over cooling water (its running and
      load terms) grows by ``rise_factor``, ramping in over ``ramp_s``; the extra heat
      passes through the bearing's thermal lag like the rest of the rise.
    """

    plant: str
    unit: str
    signature: SignatureKind
    start: datetime
    end: datetime
    cause: str
    magnitude: dict[str, float] = field(hash=False)


#: The planted condition-monitoring episodes (every number and cause invented). Cavitation
#: sits in the late-summer low-flow season at the run-of-river plant, where low river gives
#: low tailwater; a navigation-pool drawdown downstream lowers it further. Each unit's
#: first 8 weeks (from DEFAULT_START) stay clean, as a detector's healthy baseline. The rope
#: is on Kaplan U1: the fleet's only Francis units are MG1 (kept clean) and MG2 (its step
#: truth), and a Kaplan's blades near flat at part load leave swirl for a rope too.
SIGNATURES: tuple[Signature, ...] = (
    Signature("LBD", "U1", "vortex_rope",
              datetime(2026, 3, 9, 14, 0, tzinfo=UTC), datetime(2026, 3, 16, 14, 0, tzinfo=UTC),
              "U1 held at 42-53 % load as the plant's regulating reserve while its draft-tube "
              "air-admission valve was isolated for repair: an undamped part-load vortex rope "
              "(invented)",
              {"unit_load_min_fraction": 0.42, "unit_load_max_fraction": 0.53,
               # 4 % of rho g H peak to peak: ~7 kPa at 18.5 m, a few % as part-load ropes
               # reach in model tests (order of magnitude from memory; level invented)
               "pulsation_rise_of_head": 0.04, "rope_load_fraction": 0.47,
               "rope_load_width_fraction": 0.15}),
    Signature("GLF", "MG4", "bearing",
              datetime(2026, 6, 8, 6, 0, tzinfo=UTC), datetime(2026, 6, 29, 6, 0, tzinfo=UTC),
              "guide-bearing oil cooler fouled by snowmelt silt in the cooling water; the "
              "cleaned standby cooler was switched in at the end (invented)",
              # 30 % more rise: ~7.5 K at rated load on MG4's (20 + 5 load) K rise (invented)
              {"rise_factor": 0.30, "ramp_s": 3 * 86400.0}),
    *(Signature("LBD", "U2", "cavitation", start, start + timedelta(days=days),
                "downstream navigation pool drawn down 1.5 m for lock-gate repair: low "
                "tailwater, plant sigma about 0.1 lower, with U2 running alone at 82-95 % "
                "load while U1 and U3 stood by (invented)",
                {"tailwater_drawdown_m": 1.5, "drawdown_ramp_s": 6 * 3600.0,
                 "unit_load_min_fraction": 0.82, "unit_load_max_fraction": 0.95,
                 "other_units_load_max_fraction": 0.0,  # they stand by
                 "onset_load_fraction": 0.65, "full_load_fraction": 0.85,
                 # ~9x the healthy 0.9 m/s2 at rating; 0.3 point efficiency (invented)
                 "hf_vibration_rise_m_s2": 8.0, "efficiency_deficit_fraction": 0.003})
      for start, days in ((datetime(2026, 7, 27, 13, 0, tzinfo=UTC), 3),
                          (datetime(2026, 8, 31, 13, 0, tzinfo=UTC), 4),
                          (datetime(2026, 10, 5, 13, 0, tzinfo=UTC), 2))),
)


def plant_design(code: str) -> PlantDesign:
    """The plant design with ``code``."""
    for plant in PLANTS:
        if plant.code == code:
            return plant
    raise KeyError(code)
