"""Unit conversion at the boundary: mm/deg <-> m/rad.

References: the SI definitions (1 mm = 1e-3 m; 1 deg = pi/180 rad) and Python's
``math.radians``/``math.degrees``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.units import (
    angle_text,
    deg_from_rad,
    joint_scale_to_si,
    joint_unit_labels,
    joint_value_text,
    joints_si_from_user,
    joints_user_from_si,
    length_text,
    m_from_mm,
    mm_from_m,
    rad_from_deg,
    speed_text,
)

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)


def test_reference_values() -> None:
    assert m_from_mm(1500.0) == 1.5  # SI: 1 mm = 1e-3 m
    assert mm_from_m(0.25) == 250.0
    assert rad_from_deg(180.0) == pytest.approx(math.pi, rel=1e-16)  # SI: 1 deg = pi/180 rad
    assert deg_from_rad(math.pi / 2) == pytest.approx(90.0, rel=1e-16)


def test_angles_match_python_math() -> None:
    values = np.linspace(-720.0, 720.0, 97)
    np.testing.assert_allclose(rad_from_deg(values), [math.radians(v) for v in values], rtol=1e-15)
    np.testing.assert_allclose(
        deg_from_rad(values / 100), [math.degrees(v / 100) for v in values], rtol=1e-15
    )


def test_shapes_are_kept() -> None:
    value = np.ones((2, 3, 4))
    for function in (m_from_mm, mm_from_m, rad_from_deg, deg_from_rad):
        assert function(value).shape == (2, 3, 4)
        assert function(value).dtype == np.float64
    assert np.ndim(m_from_mm(3)) == 0


@settings(derandomize=True, max_examples=200, deadline=500)
@given(value=finite)
def test_round_trips(value: float) -> None:
    assert mm_from_m(m_from_mm(value)) == pytest.approx(value, rel=1e-15, abs=1e-300)
    assert deg_from_rad(rad_from_deg(value)) == pytest.approx(value, rel=1e-15, abs=1e-300)


def test_joint_vectors_mix_units() -> None:
    prismatic = np.array([False, True, False, True])
    # revolute: pi/180 per degree, prismatic: 1/1000 per millimetre (SI definitions)
    np.testing.assert_allclose(
        joint_scale_to_si(prismatic), [math.pi / 180, 1e-3, math.pi / 180, 1e-3]
    )
    user = np.array([[90.0, 250.0, -45.0, 0.0], [180.0, -10.0, 30.0, 1000.0]])
    si = joints_si_from_user(user, prismatic)
    np.testing.assert_allclose(
        si, [[math.pi / 2, 0.25, -math.pi / 4, 0.0], [math.pi, -0.01, math.pi / 6, 1.0]]
    )
    np.testing.assert_allclose(joints_user_from_si(si, prismatic), user, rtol=1e-15)
    assert joint_unit_labels(prismatic) == ["deg", "mm", "deg", "mm"]


def test_length_text() -> None:
    # closed form: 1 m = 1000 mm (SI), rounded to the given decimals
    assert length_text(0.0123) == "12.3 mm"
    assert length_text(0.0123, 0) == "12 mm"
    assert length_text(-0.0045) == "-4.5 mm"
    assert length_text(1.5, 0) == "1500 mm"
    assert length_text(0.25, 2) == "250.00 mm"
    # closed form: 0.0123456 m = 12.3456 mm, three significant digits
    assert length_text(0.0123456, 3, significant=True) == "12.3 mm"
    assert length_text(2.0, 3, significant=True) == "2e+03 mm"  # Python's g format: 2000 -> 2e+03
    assert length_text(np.float64(0.003)) == "3.0 mm"


def test_angle_text() -> None:
    # closed form: pi rad = 180 deg (SI), rounded to the given decimals
    assert angle_text(math.pi / 45) == "4.0°"
    assert angle_text(math.pi / 4) == "45.0°"
    assert angle_text(-math.pi / 2, 0) == "-90°"
    assert angle_text(math.pi / 6, 1, unit="deg") == "30.0 deg"
    assert angle_text(math.pi / 3, 0, unit="deg") == "60 deg"
    # closed form: 1 rad = 57.2957795... deg
    assert angle_text(1.0, 3, unit="deg", significant=True) == "57.3 deg"


def test_joint_value_text_by_kind() -> None:
    # closed form: prismatic 1 m = 1000 mm, revolute pi rad = 180 deg (SI)
    assert joint_value_text(0.05, True) == "50.0 mm"
    assert joint_value_text(0.05, True, 0, angle_unit="deg") == "50 mm"
    assert joint_value_text(math.pi / 36, False) == "5.0°"
    assert joint_value_text(math.pi / 36, False, angle_unit="deg") == "5.0 deg"
    assert joint_value_text(-math.pi / 2, False, 2) == "-90.00°"


def test_speed_text() -> None:
    # closed form: 1 m/s = 1000 mm/s (SI)
    assert speed_text(0.25) == "250 mm/s"
    assert speed_text(1.2346, 1) == "1234.6 mm/s"
