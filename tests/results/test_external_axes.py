"""External-axis values at the boundary: track in mm, turntables in deg."""

from __future__ import annotations

import numpy as np

from posebridge.cell.external_axes import ExternalAxes
from posebridge.results.external_axes import external_user_from_si


def _axes() -> ExternalAxes:
    zeros = np.zeros(2)
    return ExternalAxes(
        names=("track", "table"),
        prismatic=np.array([True, False]),
        lower=zeros,
        upper=zeros,
        home=zeros,
        velocity_max=zeros,
        acceleration_max=zeros,
        values=zeros,
        track=None,
        turntables=(),
    )


def test_track_in_mm_turntables_in_deg_batch_first() -> None:
    values = np.array([[1.25, np.pi / 2], [-0.5, -np.pi]])
    # 1 m = 1000 mm, pi rad = 180 deg (definitions).
    expected = np.array([[1250.0, 90.0], [-500.0, -180.0]])
    np.testing.assert_allclose(external_user_from_si(_axes(), values), expected, rtol=1e-15)
    assert external_user_from_si(_axes(), values[0]).shape == (2,)
