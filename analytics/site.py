"""Site quantities: local acceleration of gravity and standard-atmosphere air pressure.

Functions take scalars, numpy arrays or pandas Series and return the same kind; NaN in,
NaN out.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

ArrayLike = float | npt.NDArray[np.float64]

#: IEC 60041:1991, 2.3.2 (and IEC 60193): g = G_EQUATOR (1 + G_LATITUDE_TERM sin^2 phi)
#: - G_ALTITUDE_TERM z. Coefficients as given there (from memory).
G_EQUATOR = 9.7803  # [m/s2]
G_LATITUDE_TERM = 0.0053  # [-]
G_ALTITUDE_TERM = 3e-6  # [1/s2], i.e. m/s2 per m of altitude

#: ISO 2533:1975 standard atmosphere, troposphere (below 11 km).
P_SEA_LEVEL = 101_325.0  # [Pa]
T_SEA_LEVEL = 288.15  # [K]
LAPSE_RATE = 0.0065  # [K/m]
G_STANDARD = 9.80665  # [m/s2], the standard atmosphere's own (conventional) gravity
R_AIR = 287.05287  # [J/(kg K)], specific gas constant of dry air in ISO 2533
TROPOPAUSE = 11_000.0  # [m]


def local_gravity(latitude: ArrayLike, altitude: ArrayLike) -> ArrayLike:
    """Local acceleration of gravity.

    Parameters
    ----------
    latitude : float or array [deg]
        Geographic latitude, north positive.
    altitude : float or array [m]
        Altitude above sea level.

    Returns
    -------
    float or array [m/s2]

    Notes
    -----
    ``g = 9.7803 (1 + 0.0053 sin^2(phi)) - 3e-6 z``

    References
    ----------
    IEC 60041:1991, Field acceptance tests to determine the hydraulic performance of
    hydraulic turbines, storage pumps and pump-turbines, 2.3.2; the same formula is in
    IEC 60193:2019 (model acceptance tests).
    """
    phi = np.radians(latitude)
    return G_EQUATOR * (1.0 + G_LATITUDE_TERM * np.sin(phi) ** 2) - G_ALTITUDE_TERM * altitude


def atmospheric_pressure(altitude: ArrayLike) -> ArrayLike:
    """Air pressure of the standard atmosphere at an altitude in the troposphere.

    Parameters
    ----------
    altitude : float or array [m]
        Geopotential altitude above sea level, below 11,000 m (NaN above).

    Returns
    -------
    float or array [Pa]

    Notes
    -----
    ``p = p0 (1 - L z / T0) ^ (g0 / (R L))`` with p0 = 101,325 Pa, T0 = 288.15 K,
    L = 0.0065 K/m, g0 = 9.80665 m/s2, R = 287.05287 J/(kg K). The actual pressure at a
    plant varies with the weather by a few per cent around this value.

    References
    ----------
    ISO 2533:1975, Standard Atmosphere.
    """
    z = np.asarray(altitude, dtype=np.float64)
    exponent = G_STANDARD / (R_AIR * LAPSE_RATE)
    with np.errstate(invalid="ignore"):
        pressure = P_SEA_LEVEL * (1.0 - LAPSE_RATE * z / T_SEA_LEVEL) ** exponent
    pressure = np.where(z <= TROPOPAUSE, pressure, np.nan)
    if np.ndim(altitude) == 0:
        return float(pressure)
    if hasattr(altitude, "index"):  # pandas Series in, Series out
        return type(altitude)(pressure, index=altitude.index)  # type: ignore[call-arg]
    return pressure
