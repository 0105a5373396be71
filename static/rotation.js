// Rotation helpers for drawing: orientation of the tool and target triads.
// Conventions as the server: roll-pitch-yaw about fixed X, Y, Z,
// R = Rz(yaw) Ry(pitch) Rx(roll); quaternions [w, x, y, z].

const RAD_PER_DEG = Math.PI / 180;

/** Rotation matrix (rows) from roll, pitch, yaw in degrees. */
export function matrixFromRpyDeg([rollDeg, pitchDeg, yawDeg]) {
  const [r, p, y] = [rollDeg, pitchDeg, yawDeg].map((a) => a * RAD_PER_DEG);
  const [cr, sr, cp, sp, cy, sy] = [Math.cos(r), Math.sin(r), Math.cos(p), Math.sin(p), Math.cos(y), Math.sin(y)];
  return [
    [cy * cp, cy * sp * sr - sy * cr, cy * sp * cr + sy * sr],
    [sy * cp, sy * sp * sr + cy * cr, sy * sp * cr - cy * sr],
    [-sp, cp * sr, cp * cr],
  ];
}

/** Rotation matrix (rows) from a unit quaternion [w, x, y, z]. */
export function matrixFromQuaternion([w, x, y, z]) {
  return [
    [1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y)],
    [2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x)],
    [2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)],
  ];
}

/** Column k of a 3x3 matrix given as rows. */
export function column(matrix, k) {
  return [matrix[0][k], matrix[1][k], matrix[2][k]];
}

/**
 * The rigid motion carrying pose `from` onto pose `to` (both {position_mm, rpy_deg}
 * in the world), as a function of a world point: p' = R_to R_from^T (p - t_from) + t_to.
 */
export function rigidMotion(from, to) {
  const A = matrixFromRpyDeg(from.rpy_deg);
  const B = matrixFromRpyDeg(to.rpy_deg);
  // D = B A^T
  const D = [0, 1, 2].map((i) => [0, 1, 2].map((j) => B[i][0] * A[j][0] + B[i][1] * A[j][1] + B[i][2] * A[j][2]));
  return (point) => {
    const d = [0, 1, 2].map((k) => point[k] - from.position_mm[k]);
    return [0, 1, 2].map((i) => D[i][0] * d[0] + D[i][1] * d[1] + D[i][2] * d[2] + to.position_mm[i]);
  };
}
