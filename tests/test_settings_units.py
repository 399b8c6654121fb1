"""Settings from the environment, and unit conversions against their definitions."""

from __future__ import annotations

from pathlib import Path

import pytest

from hydrodrift.settings import Settings
from ingest.units import UnitError, linear_to_si, quantity_to_si


def test_default_database_is_a_sqlite_file_under_the_data_dir(tmp_path: Path,
                                                              monkeypatch) -> None:
    monkeypatch.delenv("HYDRODRIFT_DATABASE_URL", raising=False)
    monkeypatch.setenv("HYDRODRIFT_DATA_DIR", str(tmp_path))
    settings = Settings(_env_file=None)
    assert settings.effective_database_url == f"sqlite:///{tmp_path / 'hydrodrift.sqlite3'}"


def test_database_url_from_the_environment(monkeypatch) -> None:
    monkeypatch.setenv("HYDRODRIFT_DATABASE_URL", "postgresql+psycopg://u@h/db")
    assert Settings(_env_file=None).effective_database_url == "postgresql+psycopg://u@h/db"


def test_bad_threshold_is_refused(monkeypatch) -> None:
    monkeypatch.setenv("HYDRODRIFT_QUARANTINE_BAD_ROW_FRACTION", "1.5")
    with pytest.raises(ValueError, match="quarantine_bad_row_fraction"):
        Settings(_env_file=None)


# Exact definitions: 1 ft = 0.3048 m (international foot, 1959); 1 lbf/in2 = 6894.757 Pa;
# 1 mH2O (conventional) = 9806.65 Pa; 1 rpm = 2*pi/60 rad/s; degF: K = (F + 459.67) * 5/9
# (NIST SP 811, appendix B; from memory).
@pytest.mark.parametrize(
    ("unit", "si", "a", "b"),
    [
        ("MW", "W", 1e6, 0.0),
        ("kW", "W", 1e3, 0.0),
        ("ft", "m", 0.3048, 0.0),
        ("psi", "Pa", 6894.757293168, 0.0),
        ("bar", "Pa", 1e5, 0.0),
        ("mH2O", "Pa", 9806.65, 0.0),
        ("cfs", "m**3/s", 0.3048**3, 0.0),
        ("rpm", "rad/s", 2 * 3.141592653589793 / 60, 0.0),
        ("degC", "K", 1.0, 273.15),
        ("degF", "K", 5 / 9, 459.67 * 5 / 9),
        ("um", "m", 1e-6, 0.0),
        ("mm/s", "m/s", 1e-3, 0.0),
        ("in/s", "m/s", 0.0254, 0.0),
        ("mil_length", "m", 25.4e-6, 0.0),
        ("percent", "dimensionless", 0.01, 0.0),
        ("deg", "rad", 3.141592653589793 / 180, 0.0),
    ],
)
def test_linear_conversion(unit: str, si: str, a: float, b: float) -> None:
    got_a, got_b = linear_to_si(unit, si)
    assert got_a == pytest.approx(a, rel=1e-12)
    assert got_b == pytest.approx(b, rel=1e-12, abs=1e-12)


def test_unknown_and_mismatched_units() -> None:
    with pytest.raises(UnitError, match="unknown unit 'MWW'"):
        linear_to_si("MWW", "W")
    with pytest.raises(UnitError, match="not a unit of 'Pa'"):
        linear_to_si("m", "Pa")
    with pytest.raises(UnitError, match="is not a quantity of 'W'"):
        quantity_to_si("12 m", "W")
    assert quantity_to_si("120 MW", "W") == pytest.approx(1.2e8)
