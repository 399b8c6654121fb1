"""Velocity triangles and the Euler equation against textbook worked examples."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from analytics.triangles import (
    VelocityTriangle,
    blade_speed,
    euler_work,
    euler_work_of,
    meridional_velocity,
)

G = 9.81  # the textbooks' gravity in these examples


def test_francis_inlet_worked_example_step_by_step() -> None:
    # R.K. Bansal, "A Textbook of Fluid Mechanics and Hydraulic Machines", ch. 18
    # (hydraulic turbines), worked problem on a Francis turbine (from memory): 148.25 kW
    # at overall efficiency 0.75, head 7.62 m, peripheral speed 0.26 sqrt(2gH), flow
    # velocity at inlet 0.96 sqrt(2gH), 150 rpm, hydraulic losses 22 % of the available
    # energy, radial discharge. Book answers (from memory): guide blade angle 32.62 deg,
    # vane angle 37.74 deg (both from the tangent), D1 = 0.4047 m, B1 = 0.177 m.
    head = 7.62
    speed = 150.0 * 2.0 * math.pi / 60.0
    v = math.sqrt(2.0 * G * head)
    u1 = 0.26 * v
    c_m1 = 0.96 * v
    radius = u1 / speed
    assert blade_speed(speed, radius) == pytest.approx(u1)
    assert 2.0 * radius == pytest.approx(0.4047, abs=1e-4)  # D1 from the book
    # hydraulic efficiency 0.78 with radial discharge: u1 c_theta1 = 0.78 g H
    c_theta1 = 0.78 * G * head / u1
    assert c_theta1 == pytest.approx(18.34, abs=0.01)  # Vw1 (from memory: 18.34 m/s)
    inlet = VelocityTriangle(u1, c_m1, c_theta1)
    # this project measures angles from the meridional (radial) direction; the book from
    # the tangent, so the complements must match
    assert 90.0 - math.degrees(float(inlet.alpha)) == pytest.approx(32.62, abs=0.01)
    assert 90.0 - math.degrees(float(inlet.beta)) == pytest.approx(37.74, abs=0.01)
    assert float(inlet.w_theta) == pytest.approx(c_theta1 - u1)
    # the same triangle from either angle
    again = VelocityTriangle.from_flow_angle(u1, c_m1, inlet.alpha)
    assert float(again.c_theta) == pytest.approx(c_theta1, rel=1e-12)
    again = VelocityTriangle.from_blade_angle(u1, c_m1, inlet.beta)
    assert float(again.c_theta) == pytest.approx(c_theta1, rel=1e-12)
    # flow from the shaft power and overall efficiency, then continuity gives B1
    flow = 148.25e3 / (1000.0 * G * head * 0.75)
    width = flow / (2.0 * math.pi * radius * c_m1)
    assert width == pytest.approx(0.177, abs=5e-4)  # B1 from the book
    assert float(meridional_velocity(flow, 2.0 * math.pi * radius * width)) == pytest.approx(
        c_m1)
    # Euler work with swirl-free (radial) discharge and the runner power
    outlet = VelocityTriangle(0.5 * u1, 1.0, 0.0)
    work = float(euler_work_of(inlet, outlet))
    assert work == pytest.approx(0.78 * G * head, rel=1e-12)
    runner_power = 1000.0 * flow * work
    # overall / hydraulic = mechanical efficiency 0.75 / 0.78
    assert 148.25e3 / runner_power == pytest.approx(0.75 / 0.78, rel=1e-12)


def test_pelton_bucket_worked_example_step_by_step() -> None:
    # R.K. Bansal, same book, ch. 18, first Pelton-wheel problem (from memory): bucket
    # speed 10 m/s, jet 700 l/s, head 30 m, jet deflected through 160 deg, Cv 0.98.
    # Book answers (from memory): V1 = 23.77 m/s, Vw2 = 2.94 m/s, power to the runner
    # 186.97 kW, hydraulic efficiency 94.54 % (on the jet's kinetic energy). The book
    # rounds V1 to 23.77, hence rel=1e-3 on the power.
    c1 = 0.98 * math.sqrt(2.0 * G * 30.0)
    assert c1 == pytest.approx(23.77, abs=0.01)
    u = 10.0
    w1 = c1 - u
    deflection = math.radians(160.0)
    inlet = VelocityTriangle(u, 0.0, c1)
    # outlet: w2 = w1 (no bucket friction), turned through 160 deg
    outlet = VelocityTriangle(u, w1 * math.sin(deflection), u + w1 * math.cos(deflection))
    assert -float(outlet.c_theta) == pytest.approx(2.94, abs=0.01)  # Vw2, backwards
    assert float(outlet.w) == pytest.approx(w1, rel=1e-12)
    work = float(euler_work_of(inlet, outlet))
    assert work == pytest.approx(u * w1 * (1.0 - math.cos(deflection)), rel=1e-12)
    assert 1000.0 * 0.7 * work == pytest.approx(186.97e3, rel=1e-3)
    assert work / (0.5 * c1**2) == pytest.approx(0.9454, abs=2e-4)


def test_closure_and_angles_follow_the_sign_convention() -> None:
    # domain primer section 2: c_theta = c_m tan(alpha), w_theta = c_m tan(beta),
    # c_theta = U + w_theta. A Francis outlet with beta2 = -60 deg at U = c_m / tan(60)
    # leaves swirl-free: c_theta2 = U + c_m tan(-60 deg) = 0.
    c_m = 10.0
    u = c_m * math.tan(math.radians(60.0))
    t = VelocityTriangle.from_blade_angle(u, c_m, math.radians(-60.0))
    assert float(t.c_theta) == pytest.approx(0.0, abs=1e-12)
    assert float(t.alpha) == pytest.approx(0.0, abs=1e-12)
    assert float(t.w) == pytest.approx(c_m / math.cos(math.radians(60.0)))
    assert float(t.c) == pytest.approx(c_m)


def test_vectorised_broadcasting() -> None:
    u = np.array([[10.0], [20.0]])
    c_m = np.array([5.0, 6.0, 7.0])
    t = VelocityTriangle.from_flow_angle(u, c_m, 0.5)
    assert t.u.shape == t.c_m.shape == t.c_theta.shape == (2, 3)
    np.testing.assert_allclose(t.c_theta, np.broadcast_to(c_m * np.tan(0.5), (2, 3)))
    y = euler_work(u, t.c_theta, 0.5 * u, 0.0)
    assert y.shape == (2, 3)


finite = st.floats(min_value=-200.0, max_value=200.0, allow_nan=False)


@given(u=finite, c_m=st.floats(min_value=0.1, max_value=100.0), c_theta=finite)
def test_triangle_identities_hold(u: float, c_m: float, c_theta: float) -> None:
    # geometry of any triangle: c_theta = U + w_theta, the magnitudes, and the tangents of
    # both angles as the convention defines them
    t = VelocityTriangle(u, c_m, c_theta)
    assert float(t.c_theta) == pytest.approx(float(t.u + t.w_theta), abs=1e-9)
    assert float(t.c) ** 2 == pytest.approx(c_m**2 + c_theta**2, rel=1e-12)
    assert float(t.w) ** 2 == pytest.approx(c_m**2 + (c_theta - u) ** 2, rel=1e-12)
    assert c_m * math.tan(float(t.alpha)) == pytest.approx(c_theta, rel=1e-9, abs=1e-9)
    assert c_m * math.tan(float(t.beta)) == pytest.approx(c_theta - u, rel=1e-9, abs=1e-9)
