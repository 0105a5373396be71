// Geometry of the cell's solids for drawing: box and cylinder surface points in
// the world, triangle meshes for the 3D view and projected outlines (convex
// hulls) for the plan and elevation views. Shapes come from GET /api/cell
// (centre position in mm, roll-pitch-yaw in degrees, sizes in mm).

import { matrixFromRpyDeg } from "../rotation.js";

const CYLINDER_STEPS = 24;

function place(shape, local) {
  const R = matrixFromRpyDeg(shape.rpy_deg);
  const p = shape.position_mm;
  return local.map(([x, y, z]) => [
    p[0] + R[0][0] * x + R[0][1] * y + R[0][2] * z,
    p[1] + R[1][0] * x + R[1][1] * y + R[1][2] * z,
    p[2] + R[2][0] * x + R[2][1] * y + R[2][2] * z,
  ]);
}

/**
 * Surface points of a shape in the world: a box's 8 corners, two rims of a
 * cylinder, or the 8 corners of a mesh's bounding box (its triangles are drawn
 * by mesh_draw.js; the corners bound it for outlines, drag previews and view ranges).
 */
export function shapePoints(shape) {
  if (shape.shape === "mesh") {
    const [lo, hi] = shape.bounds_mm;
    const local = [];
    for (const z of [lo[2], hi[2]]) {
      for (const [x, y] of [[lo[0], lo[1]], [hi[0], lo[1]], [hi[0], hi[1]], [lo[0], hi[1]]]) {
        local.push([x, y, z]);
      }
    }
    return place(shape, local);
  }
  if (shape.shape === "box") {
    const [a, b, c] = shape.size_mm.map((s) => s / 2);
    const local = [];
    for (const z of [-c, c]) {
      for (const [x, y] of [[-a, -b], [a, -b], [a, b], [-a, b]]) {
        local.push([x, y, z]);
      }
    }
    return place(shape, local);
  }
  const local = [];
  const h = shape.height_mm / 2;
  for (const z of [-h, h]) {
    for (let s = 0; s < CYLINDER_STEPS; s += 1) {
      const phi = (2 * Math.PI * s) / CYLINDER_STEPS;
      local.push([shape.radius_mm * Math.cos(phi), shape.radius_mm * Math.sin(phi), z]);
    }
  }
  return place(shape, local);
}

/** Append a shape's triangles to `mesh` = {x, y, z, i, j, k}. */
export function appendShapeMesh(mesh, shape) {
  const points = shapePoints(shape);
  const first = mesh.x.length;
  for (const [x, y, z] of points) {
    mesh.x.push(x);
    mesh.y.push(y);
    mesh.z.push(z);
  }
  const n = points.length / 2; // points per ring (4 for a box)
  for (let s = 0; s < n; s += 1) {
    const a = first + s;
    const b = first + ((s + 1) % n);
    mesh.i.push(a, b);
    mesh.j.push(b, b + n);
    mesh.k.push(a + n, a + n);
  }
  for (let s = 1; s < n - 1; s += 1) {
    mesh.i.push(first, first + n);
    mesh.j.push(first + s, first + n + s);
    mesh.k.push(first + s + 1, first + n + s + 1);
  }
}

/** Convex hull of 2D points (Andrew's monotone chain), closed (first point repeated). */
export function convexHull(points) {
  const sorted = [...points].sort((p, q) => p[0] - q[0] || p[1] - q[1]);
  const cross = (o, a, b) => (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0]);
  const half = (list) => {
    const chain = [];
    for (const p of list) {
      while (chain.length >= 2 && cross(chain[chain.length - 2], chain[chain.length - 1], p) <= 0) {
        chain.pop();
      }
      chain.push(p);
    }
    chain.pop();
    return chain;
  };
  const hull = [...half(sorted), ...half([...sorted].reverse())];
  return hull.length ? [...hull, hull[0]] : hull;
}

/** Outline of a shape's orthographic projection on data axes h, v: closed polygon {xs, ys}. */
export function projectedOutline(shape, h, v) {
  const hull = convexHull(shapePoints(shape).map((p) => [p[h], p[v]]));
  return { xs: hull.map((p) => p[0]), ys: hull.map((p) => p[1]) };
}

/** Axis-aligned bounds [[x, y, z] min, max] of the cell's shapes and targets, or null. */
export function sceneBounds(scene) {
  const points = [
    ...scene.shapes.filter((s) => s.role !== "keep_out").flatMap(shapePoints),
    ...scene.targets.map((t) => t.position_mm),
  ];
  if (points.length === 0) {
    return null;
  }
  return [0, 1].map((side) =>
    [0, 1, 2].map((k) => (side === 0 ? Math.min : Math.max)(...points.map((p) => p[k]))),
  );
}
