"""static/rotation.js against scipy.spatial.transform.Rotation, run in the page.

References: scipy ``Rotation.from_euler("xyz", ..., degrees=True)`` (lower-case: extrinsic, fixed
axes X then Y then Z, i.e. R = Rz(yaw) Ry(pitch) Rx(roll), the convention of DESIGN/DEVELOPERS)
and ``Rotation.from_quat`` (scalar-last ``[x, y, z, w]``; the page uses ``[w, x, y, z]``).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.spatial.transform import Rotation

_ROTATION_JS = """async ({ rpys, quaternions, motion }) => {
  const m = await import("/static/rotation.js");
  const move = m.rigidMotion(motion.from, motion.to);
  return {
    fromRpy: rpys.map((rpy) => m.matrixFromRpyDeg(rpy)),
    fromQuaternion: quaternions.map((q) => m.matrixFromQuaternion(q)),
    columns: rpys.map((rpy) => [0, 1, 2].map((k) => m.column(m.matrixFromRpyDeg(rpy), k))),
    moved: motion.points.map((p) => move(p)),
  };
}"""


def test_rotation_js_matches_scipy(open_page: Any) -> None:
    rng = np.random.default_rng(12)
    rpys = np.column_stack(
        [rng.uniform(-180, 180, 20), rng.uniform(-89, 89, 20), rng.uniform(-180, 180, 20)]
    )
    quaternions_xyzw = Rotation.random(20, random_state=5).as_quat()
    quaternions_wxyz = np.roll(quaternions_xyzw, 1, axis=1)
    from_pose = {"position_mm": [100.0, -50.0, 300.0], "rpy_deg": [10.0, -20.0, 30.0]}
    to_pose = {"position_mm": [-200.0, 400.0, 0.0], "rpy_deg": [-45.0, 15.0, 120.0]}
    points = rng.uniform(-500, 500, (10, 3))
    result = open_page.page.evaluate(
        _ROTATION_JS,
        {
            "rpys": rpys.tolist(),
            "quaternions": quaternions_wxyz.tolist(),
            "motion": {"from": from_pose, "to": to_pose, "points": points.tolist()},
        },
    )
    # scipy: lower-case "xyz" is extrinsic X, Y, Z = Rz Ry Rx
    expected_rpy = Rotation.from_euler("xyz", rpys, degrees=True).as_matrix()
    np.testing.assert_allclose(result["fromRpy"], expected_rpy, atol=1e-12)
    # column k of the matrix: the rotated frame's k-th axis (scipy's matrix, transposed rows)
    np.testing.assert_allclose(result["columns"], np.transpose(expected_rpy, (0, 2, 1)), atol=1e-12)
    expected_q = Rotation.from_quat(quaternions_xyzw).as_matrix()
    np.testing.assert_allclose(result["fromQuaternion"], expected_q, atol=1e-12)
    # rigid motion: p' = R_to R_from^T (p - t_from) + t_to, composed with scipy
    R_from = Rotation.from_euler("xyz", from_pose["rpy_deg"], degrees=True)
    R_to = Rotation.from_euler("xyz", to_pose["rpy_deg"], degrees=True)
    moved = (R_to * R_from.inv()).apply(points - from_pose["position_mm"]) + to_pose["position_mm"]
    np.testing.assert_allclose(result["moved"], moved, atol=1e-9)
    assert open_page.problems.page_errors == []
