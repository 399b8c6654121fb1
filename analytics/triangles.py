"""Velocity triangles and the Euler turbine equation (mean-line, one streamline).

Notation and sign convention (the project's domain primer, section 2), kept throughout:

- ``c`` absolute velocity, ``w`` velocity relative to the blade, ``u = omega * r`` blade
  speed; subscript ``m`` meridional, ``theta`` tangential (circumferential).
- Station 1 is the runner inlet, station 2 the runner outlet.
- Angles are measured **from the meridional direction**, positive **in the direction of
  rotation**: ``c_theta = c_m tan(alpha)``, ``w_theta = c_m tan(beta)``, and the triangle
  closes as ``c_theta = u + w_theta``. A Francis runner therefore has a negative outlet
  blade angle (the relative flow leaves against the rotation) and ``alpha1`` close to
  +90 deg at small guide-vane openings.

The Euler turbine equation (e.g. Dixon & Hall, *Fluid Mechanics and Thermodynamics of
Turbomachinery*, 7th ed., ch. 1 and 9) gives the specific work the runner takes from the
water, ``Y = u1 c_theta1 - u2 c_theta2`` [J/kg]; the runner power is ``rho Q_runner Y``.

All functions are vectorised: arguments broadcast together as numpy arrays, SI units.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


def blade_speed(speed: ArrayLike, radius: ArrayLike) -> NDArray:
    """Blade (peripheral) speed ``u = omega r``.

    Parameters
    ----------
    speed : [rad/s] rotational speed omega
    radius : [m] radius of the station

    Returns
    -------
    [m/s] blade speed
    """
    return np.asarray(speed, dtype=float) * np.asarray(radius, dtype=float)


def meridional_velocity(flow: ArrayLike, area: ArrayLike, blockage: ArrayLike = 0.0
                        ) -> NDArray:
    """Meridional velocity ``c_m = Q / (A (1 - blockage))`` from continuity.

    Parameters
    ----------
    flow : [m3/s] volume flow through the station
    area : [m2] geometric through-flow area normal to the meridional direction
        (``2 pi R b`` for a radial inlet of height ``b``)
    blockage : fraction 0..1 of the area taken by the blade thickness

    Returns
    -------
    [m/s] meridional velocity
    """
    area_eff = np.asarray(area, dtype=float) * (1.0 - np.asarray(blockage, dtype=float))
    return np.asarray(flow, dtype=float) / area_eff


def euler_work(u1: ArrayLike, c_theta1: ArrayLike, u2: ArrayLike, c_theta2: ArrayLike
               ) -> NDArray:
    """Euler turbine equation: specific runner work ``Y = u1 c_theta1 - u2 c_theta2``.

    Parameters
    ----------
    u1, u2 : [m/s] blade speed at inlet and outlet
    c_theta1, c_theta2 : [m/s] absolute tangential velocity at inlet and outlet
        (positive in the direction of rotation)

    Returns
    -------
    [J/kg] specific work done by the water on the runner (positive for a turbine)

    References
    ----------
    L. Euler (1754); in any turbomachinery text, e.g. Dixon & Hall, 7th ed., eq. (1.19).
    """
    return (np.asarray(u1, dtype=float) * np.asarray(c_theta1, dtype=float)
            - np.asarray(u2, dtype=float) * np.asarray(c_theta2, dtype=float))


@dataclass(frozen=True)
class VelocityTriangle:
    """One velocity triangle: blade speed, meridional and absolute tangential velocity.

    The three defining components broadcast to one shape on construction. Everything
    else follows from ``c_theta = u + w_theta`` and the angle convention of this module.

    Attributes
    ----------
    u : [m/s] blade speed
    c_m : [m/s] meridional velocity (same in the absolute and relative frame)
    c_theta : [m/s] absolute tangential velocity, positive in the direction of rotation
    """

    u: NDArray
    c_m: NDArray
    c_theta: NDArray

    def __post_init__(self) -> None:
        u, c_m, c_theta = np.broadcast_arrays(
            np.asarray(self.u, dtype=float), np.asarray(self.c_m, dtype=float),
            np.asarray(self.c_theta, dtype=float))
        object.__setattr__(self, "u", u)
        object.__setattr__(self, "c_m", c_m)
        object.__setattr__(self, "c_theta", c_theta)

    @classmethod
    def from_flow_angle(cls, u: ArrayLike, c_m: ArrayLike, alpha: ArrayLike
                        ) -> VelocityTriangle:
        """Triangle from the absolute flow angle: ``c_theta = c_m tan(alpha)``.

        Parameters
        ----------
        u : [m/s] blade speed
        c_m : [m/s] meridional velocity
        alpha : [rad] absolute flow angle from the meridional direction
        """
        c_m = np.asarray(c_m, dtype=float)
        return cls(u, c_m, c_m * np.tan(np.asarray(alpha, dtype=float)))

    @classmethod
    def from_blade_angle(cls, u: ArrayLike, c_m: ArrayLike, beta: ArrayLike
                         ) -> VelocityTriangle:
        """Triangle from the relative flow angle: ``c_theta = u + c_m tan(beta)``.

        Parameters
        ----------
        u : [m/s] blade speed
        c_m : [m/s] meridional velocity
        beta : [rad] relative flow angle from the meridional direction (the blade angle
            when the flow follows the blade)
        """
        u = np.asarray(u, dtype=float)
        c_m = np.asarray(c_m, dtype=float)
        return cls(u, c_m, u + c_m * np.tan(np.asarray(beta, dtype=float)))

    @property
    def w_theta(self) -> NDArray:
        """[m/s] relative tangential velocity ``c_theta - u``."""
        return self.c_theta - self.u

    @property
    def alpha(self) -> NDArray:
        """[rad] absolute flow angle from the meridional direction."""
        return np.arctan2(self.c_theta, self.c_m)

    @property
    def beta(self) -> NDArray:
        """[rad] relative flow angle from the meridional direction."""
        return np.arctan2(self.w_theta, self.c_m)

    @property
    def c(self) -> NDArray:
        """[m/s] magnitude of the absolute velocity."""
        return np.hypot(self.c_m, self.c_theta)

    @property
    def w(self) -> NDArray:
        """[m/s] magnitude of the relative velocity."""
        return np.hypot(self.c_m, self.w_theta)


def euler_work_of(inlet: VelocityTriangle, outlet: VelocityTriangle) -> NDArray:
    """Euler work [J/kg] between an inlet and an outlet triangle (see :func:`euler_work`)."""
    return euler_work(inlet.u, inlet.c_theta, outlet.u, outlet.c_theta)
