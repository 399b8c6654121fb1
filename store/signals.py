"""The canonical signal set: one nullable column per signal in the wide ``samples`` table.

Every value is stored in SI units (temperatures in kelvin, opening as a fraction 0..1,
angles in radians, speed in rad/s). Ingestion converts from the plant's units with pint.
The order of :data:`SIGNALS` fixes each signal's bit in ``samples.flagged_signals``;
append new signals at the end, never reorder.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntFlag


@dataclass(frozen=True)
class Signal:
    """One canonical signal.

    Attributes
    ----------
    name : column name in ``samples``
    si_unit : the pint unit string the stored value is in
    description : what the signal is, in the words of the trade
    """

    name: str
    si_unit: str
    description: str


SIGNALS: tuple[Signal, ...] = (
    Signal("active_power", "W", "generator active power at the terminals"),
    Signal("headwater_level", "m", "headwater (reservoir / forebay) level above datum"),
    Signal("tailwater_level", "m", "tailwater level above datum"),
    Signal("wk_differential_pressure", "Pa", "Winter-Kennedy differential pressure"),
    Signal("flow_rate", "m**3/s", "turbine discharge from a flow meter, where one exists"),
    Signal("gate_opening", "dimensionless",
           "guide-vane opening (Francis, Kaplan) or needle stroke (Pelton), fraction 0..1"),
    Signal("blade_angle", "rad", "Kaplan runner blade angle"),
    Signal("rotational_speed", "rad/s", "runner rotational speed"),
    Signal("spiral_case_pressure", "Pa", "gauge pressure at the turbine inlet section"),
    Signal("draft_tube_pressure", "Pa", "gauge pressure at the draft-tube cone"),
    Signal("draft_tube_pulsation", "Pa", "draft-tube pressure pulsation, peak to peak"),
    Signal("shaft_vibration", "m", "shaft relative displacement, peak to peak"),
    Signal("bearing_vibration", "m/s", "bearing housing vibration velocity, RMS"),
    Signal("hf_vibration", "m/s**2", "high-frequency (cavitation band) acceleration, RMS"),
    Signal("guide_bearing_temperature", "K", "turbine guide bearing metal temperature"),
    Signal("thrust_bearing_temperature", "K", "thrust bearing metal temperature"),
    Signal("cooling_water_temperature", "K", "bearing cooling water inlet temperature"),
    Signal("water_temperature", "K", "turbine water temperature"),
)

SIGNAL_NAMES: tuple[str, ...] = tuple(s.name for s in SIGNALS)
SIGNAL_BY_NAME: dict[str, Signal] = {s.name: s for s in SIGNALS}
SIGNAL_BIT: dict[str, int] = {s.name: 1 << i for i, s in enumerate(SIGNALS)}


def signals_mask(names: list[str] | tuple[str, ...] | set[str]) -> int:
    """The ``flagged_signals`` bitmask with the bits of ``names`` set."""
    mask = 0
    for name in names:
        mask |= SIGNAL_BIT[name]
    return mask


class Quality(IntFlag):
    """Bits of ``samples.quality``: which kinds of check flagged something in the row.

    Which signals were flagged is in ``samples.flagged_signals`` (one bit per signal in
    the order of :data:`SIGNALS`). Flags never delete a value, except that a sentinel or
    non-numeric cell is stored as NULL (there is no measurement to keep) with its flag.
    """

    OUT_OF_RANGE = 1 << 0  #: outside the signal's physical range
    SENTINEL = 1 << 1  #: an exporter's "no value" sentinel such as -9999 (stored NULL)
    STUCK = 1 << 2  #: flat-lined sensor: identical values for too long
    SPIKE = 1 << 3  #: isolated jump far outside the recent spread
    SOURCE_BAD = 1 << 4  #: the export's own quality code said bad or uncertain
    NOT_A_NUMBER = 1 << 5  #: text or a non-finite number in a numeric cell (stored NULL)
    AMBIGUOUS_TIME = 1 << 6  #: local time in a DST fold, resolved by the configured rule

    @classmethod
    def describe(cls, bits: int) -> list[str]:
        """Lower-case names of the bits set in ``bits``."""
        return [str(flag.name).lower() for flag in cls if bits & flag]
