"""Units of measure: one pint registry, linear conversions to the canonical SI units.

Every conversion factor in the project comes from here (pint's definitions plus the few
plant units pint lacks), never from a literal scattered in the code.
"""

from __future__ import annotations

from functools import lru_cache

import pint

#: Plant units that pint does not define, with their exact definitions.
EXTRA_DEFINITIONS: tuple[str, ...] = (
    "cfs = foot ** 3 / second",  # cubic feet per second (US river flow)
    "kcfs = 1000 * cfs",
    "thou = 0.001 * inch = mil_length",  # vibration displacement in the US ("mils")
    "fraction = [] = frac",
)


class UnitError(ValueError):
    """A unit string that is unknown or of the wrong kind for its signal."""


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
    """The project's unit registry (built once, on first use)."""
    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    for line in EXTRA_DEFINITIONS:
        ureg.define(line)
    return ureg


@lru_cache(maxsize=512)
def linear_to_si(unit: str, si_unit: str) -> tuple[float, float]:
    """``(a, b)`` such that ``value_in_si = a * value_in_unit + b``.

    Works for offset units too (degC, degF to K). Raises :class:`UnitError` when
    ``unit`` is unknown or not convertible to ``si_unit``.
    """
    ureg = registry()
    try:
        source = ureg.Unit(unit)
    except (pint.errors.UndefinedUnitError, AttributeError, ValueError, TypeError) as exc:
        raise UnitError(f"unknown unit {unit!r}") from exc
    target = ureg.Unit(si_unit)
    try:
        b = ureg.Quantity(0.0, source).to(target).magnitude
        # A span of 100 rather than 1 keeps the offset's round-off out of the slope.
        a = (ureg.Quantity(100.0, source).to(target).magnitude - b) / 100.0
    except pint.errors.DimensionalityError as exc:
        raise UnitError(
            f"unit {unit!r} is not a unit of {si_unit!r} "
            f"(it measures {source.dimensionality}, expected {target.dimensionality})"
        ) from exc
    return float(a), float(b)


def quantity_to_si(text: str, si_unit: str) -> float:
    """Parse a quantity such as ``"120 MW"`` and return its magnitude in ``si_unit``."""
    ureg = registry()
    try:
        quantity = ureg.Quantity(text)
    except Exception as exc:  # pint raises many kinds for malformed text
        raise UnitError(f"{text!r} is not a quantity such as '120 MW' or '450 m'") from exc
    if not isinstance(quantity, pint.Quantity):
        quantity = ureg.Quantity(float(quantity), "dimensionless")
    try:
        return float(quantity.to(si_unit).magnitude)
    except pint.errors.DimensionalityError as exc:
        raise UnitError(
            f"{text!r} is not a quantity of {si_unit!r} "
            f"(it measures {quantity.dimensionality})"
        ) from exc
