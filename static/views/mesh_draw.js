// Triangle meshes on the page, shared by every view that draws them (mesh
// fixtures of the cell, robot link meshes): plotly Mesh3d traces in the 3D
// view and filled silhouettes in the plan and elevation views. A mesh is
// {vertices_mm: [[x, y, z], ...], faces: [[i, j, k], ...]} in its own frame
// (as the server sends it, already decimated to a budget); a pose is
// {position_mm, rpy_deg} (roll, pitch, yaw about fixed X, Y, Z) of that frame
// in the world.

import { matrixFromRpyDeg } from "../rotation.js";

/** The mesh's vertices moved by `pose` into the world: [[x, y, z], ...] in mm. */
export function posedVertices(mesh, pose) {
  const R = matrixFromRpyDeg(pose.rpy_deg);
  const p = pose.position_mm;
  return mesh.vertices_mm.map(([x, y, z]) => [
    p[0] + R[0][0] * x + R[0][1] * y + R[0][2] * z,
    p[1] + R[1][0] * x + R[1][1] * y + R[1][2] * z,
    p[2] + R[2][0] * x + R[2][1] * y + R[2][2] * z,
  ]);
}

/**
 * A plotly `mesh3d` trace of a mesh at a pose.
 * @param {object} mesh {vertices_mm, faces}
 * @param {object} pose {position_mm, rpy_deg}
 * @param {{name: string, colour: string, opacity?: number, meta?: object}} style
 */
export function mesh3dTrace(mesh, pose, { name, colour, opacity = 1, meta = undefined }) {
  const points = posedVertices(mesh, pose);
  return {
    type: "mesh3d",
    name,
    x: points.map((q) => q[0]),
    y: points.map((q) => q[1]),
    z: points.map((q) => q[2]),
    i: mesh.faces.map((f) => f[0]),
    j: mesh.faces.map((f) => f[1]),
    k: mesh.faces.map((f) => f[2]),
    color: colour,
    opacity,
    flatshading: true,
    lighting: { ambient: 0.55, diffuse: 0.7 },
    hoverinfo: "name",
    showlegend: false,
    meta,
  };
}

/** `colour` (#rrggbb) mixed with white by `amount` (0: unchanged, 1: white), as #rrggbb. */
export function lighten(colour, amount) {
  const value = parseInt(colour.slice(1), 16);
  const channel = (shift) => {
    const c = (value >> shift) & 255;
    return Math.round(c + (255 - c) * amount).toString(16).padStart(2, "0");
  };
  return `#${channel(16)}${channel(8)}${channel(0)}`;
}

/**
 * The filled silhouette of a mesh's orthographic projection on data axes h, v
 * (0 = x, 1 = y, 2 = z): every triangle that is not seen edge-on as a filled
 * polygon of one opaque colour, so overlaps do not darken, in one scatter
 * trace (polygons separated by nulls). The union of the filled triangles is
 * exactly the projection of the surface.
 * @param {object} mesh {vertices_mm, faces}
 * @param {object} pose {position_mm, rpy_deg}
 * @param {number} h
 * @param {number} v
 * @param {{name: string, colour: string, meta?: object}} style
 */
export function silhouetteTrace(mesh, pose, h, v, { name, colour, meta = undefined }) {
  const points = posedVertices(mesh, pose);
  const xs = [];
  const ys = [];
  for (const [a, b, c] of mesh.faces) {
    const pa = points[a];
    const pb = points[b];
    const pc = points[c];
    const area = (pb[h] - pa[h]) * (pc[v] - pa[v]) - (pc[h] - pa[h]) * (pb[v] - pa[v]);
    if (Math.abs(area) < 1e-6) {
      continue; // seen edge-on: covers nothing
    }
    // every polygon wound the same way, so overlaps add up under the non-zero fill rule
    const [p1, p2] = area > 0 ? [pb, pc] : [pc, pb];
    xs.push(pa[h], p1[h], p2[h], pa[h], null);
    ys.push(pa[v], p1[v], p2[v], pa[v], null);
  }
  return {
    name,
    x: xs,
    y: ys,
    mode: "lines",
    fill: "toself",
    fillcolor: colour,
    line: { color: colour, width: 1 },
    connectgaps: false,
    hoverinfo: "skip",
    showlegend: false,
    meta,
  };
}

/** Whether the robot is drawn with its link meshes: it has some, the FK answer carries frame
 * orientations, and the fitted capsules are not asked for instead. */
export function drawsMeshes({ fk, robotMeshes, showCapsules }) {
  return Boolean(robotMeshes && robotMeshes.length && !showCapsules && fk.frames_rpy_deg && fk.frames_rpy_deg.length);
}

/** The pose of robot frame `link` (0 base, i after joint i) in an FK answer. */
export function linkPose(fk, link) {
  return { position_mm: fk.frames_position_mm[link], rpy_deg: fk.frames_rpy_deg[link] };
}
