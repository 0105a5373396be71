// The 3D cell view: the cell's fixtures, keep-out zones (translucent) and
// pedestal, its targets as small triads and its paths as polylines, the arm as
// capsule meshes with its kinematic chain, the tool (TCP) and target triads,
// the base frame and the floor. The cell is drawn in full only when it
// changes; arm and target moves restyle their own traces.

/* global Plotly */

import { currentArmSeverity, levelColour } from "../severity.js";
import { axis3d, draw, layout3d } from "./plotting.js";
import { frameScheduler, kinematicsSettled } from "./frame.js";
import { appendShapeMesh, sceneBounds } from "./shapes.js";
import { mesh3dTrace } from "./mesh_draw.js";
import { column, matrixFromQuaternion, matrixFromRpyDeg } from "../rotation.js";
import { drawsMeshes, linkPose, posedVertices } from "./mesh_draw.js";

const RING_STEPS = 14;
const CAP_RINGS = 3;
const TRIAD_LENGTH_MM = 100;
// The 3D view is the costliest redraw (WebGL, often software-rendered): while
// the user drags in a 2D view it is not redrawn at all, and it is redrawn
// once when the drag ends, so the dragged views stay responsive.

function sub(a, b) {
  return [a[0] - b[0], a[1] - b[1], a[2] - b[2]];
}

function cross(a, b) {
  return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]];
}

function normalized(a) {
  const length = Math.hypot(...a);
  return length > 1e-12 ? a.map((c) => c / length) : null;
}

/** Two unit vectors perpendicular to w and to each other. */
function perpendicularPair(w) {
  const helper = Math.abs(w[2]) < 0.9 ? [0, 0, 1] : [1, 0, 0];
  const u = normalized(cross(w, helper));
  return [u, cross(w, u)];
}

/**
 * Triangle mesh of a capsule (cylinder with hemispherical caps) appended to
 * `mesh` = {x, y, z, i, j, k}.
 */
export function appendCapsuleMesh(mesh, start, end, radius) {
  const w = normalized(sub(end, start)) || [0, 0, 1];
  const [u, v] = perpendicularPair(w);
  // ring latitude angles from the start pole to the end pole
  const rings = [];
  for (let r = 0; r <= CAP_RINGS; r += 1) {
    rings.push({ centre: start, angle: -Math.PI / 2 + (r * Math.PI) / (2 * CAP_RINGS) });
  }
  for (let r = 0; r <= CAP_RINGS; r += 1) {
    rings.push({ centre: end, angle: (r * Math.PI) / (2 * CAP_RINGS) });
  }
  const first = mesh.x.length;
  for (const { centre, angle } of rings) {
    const along = radius * Math.sin(angle);
    const across = radius * Math.cos(angle);
    for (let s = 0; s < RING_STEPS; s += 1) {
      const phi = (2 * Math.PI * s) / RING_STEPS;
      const [c, d] = [Math.cos(phi) * across, Math.sin(phi) * across];
      mesh.x.push(centre[0] + along * w[0] + c * u[0] + d * v[0]);
      mesh.y.push(centre[1] + along * w[1] + c * u[1] + d * v[1]);
      mesh.z.push(centre[2] + along * w[2] + c * u[2] + d * v[2]);
    }
  }
  for (let r = 0; r < rings.length - 1; r += 1) {
    for (let s = 0; s < RING_STEPS; s += 1) {
      const a = first + r * RING_STEPS + s;
      const b = first + r * RING_STEPS + ((s + 1) % RING_STEPS);
      const c = a + RING_STEPS;
      const d = b + RING_STEPS;
      mesh.i.push(a, b);
      mesh.j.push(b, d);
      mesh.k.push(c, c);
    }
  }
}

function triadTraces({ origin, rotation, name, palette, dash = "solid", width = 5, length = TRIAD_LENGTH_MM }) {
  const colours = [palette["axis-x"], palette["axis-y"], palette["axis-z"]];
  return colours.map((colour, k) => {
    const axis = column(rotation, k);
    return {
      type: "scatter3d",
      mode: "lines",
      name: `${name} ${"xyz"[k]}`,
      x: [origin[0], origin[0] + length * axis[0]],
      y: [origin[1], origin[1] + length * axis[1]],
      z: [origin[2], origin[2] + length * axis[2]],
      line: { color: colour, width, dash },
      hoverinfo: "skip",
      showlegend: false,
    };
  });
}

function cubeRanges(bounds) {
  const [low, high] = bounds;
  const centre = [0, 1, 2].map((k) => (low[k] + high[k]) / 2);
  const half = 0.6 * Math.max(high[0] - low[0], high[1] - low[1], high[2] - low[2], 400);
  return centre.map((c) => [c - half, c + half]);
}

/** Bounds of the robot (its base-frame bounds moved to the cell's base) and the cell. */
export function viewBounds({ robot, cell, cellActive }) {
  if (!cellActive || !cell) {
    return robot.bounds_mm;
  }
  const offset = cell.scene.base.position_mm;
  const [low, high] = robot.bounds_mm.map((corner) => corner.map((v, k) => v + offset[k]));
  const scene = sceneBounds(cell.scene);
  if (!scene) {
    return [low, high];
  }
  return [low.map((v, k) => Math.min(v, scene[0][k])), high.map((v, k) => Math.max(v, scene[1][k]))];
}

/** Which mesh drawings are loaded (names and versions), for redraw keys. */
export function meshKey(meshes) {
  return Object.entries(meshes)
    .map(([name, entry]) => `${name}:${entry.mesh_version}`)
    .sort()
    .join(",");
}

function meshTrace(name, shapes, style) {
  const mesh = { x: [], y: [], z: [], i: [], j: [], k: [] };
  shapes.forEach((shape) => appendShapeMesh(mesh, shape));
  return { type: "mesh3d", name, ...mesh, flatshading: true, hoverinfo: "skip", showlegend: false, ...style };
}

/** Small triads of every target, one trace per axis colour (segments split by nulls). */
function targetTriads(targets, palette) {
  const colours = [palette["axis-x"], palette["axis-y"], palette["axis-z"]];
  return colours.map((colour, k) => {
    const xs = [];
    const ys = [];
    const zs = [];
    for (const target of targets) {
      const axis = column(matrixFromRpyDeg(target.rpy_deg), k);
      const o = target.position_mm;
      xs.push(o[0], o[0] + 50 * axis[0], null);
      ys.push(o[1], o[1] + 50 * axis[1], null);
      zs.push(o[2], o[2] + 50 * axis[2], null);
    }
    return { type: "scatter3d", mode: "lines", name: `targets ${"xyz"[k]}`, x: xs, y: ys, z: zs, line: { color: colour, width: 3 }, hoverinfo: "skip", showlegend: false };
  });
}

/** Mesh fixtures whose triangles have arrived, as Mesh3d traces in their own colours. */
function meshFixtureTraces(scene, palette, meshes) {
  return scene.shapes
    .filter((s) => s.shape === "mesh" && meshes[s.name] && meshes[s.name].mesh_version === s.mesh_version)
    .map((s) => mesh3dTrace(meshes[s.name].full, s, { name: s.name, colour: s.colour || palette.fixture, meta: { role: "mesh-fixture", fixture: s.name } }));
}

function cellTraces(scene, palette, meshes) {
  const traces = meshFixtureTraces(scene, palette, meshes);
  const fixtures = scene.shapes.filter((s) => s.role === "fixture" && s.shape !== "mesh");
  const keepOuts = scene.shapes.filter((s) => s.role === "keep_out");
  const pedestal = scene.shapes.filter((s) => s.role === "pedestal");
  if (fixtures.length) {
    traces.push(meshTrace("fixtures", fixtures, { color: palette.fixture, opacity: 1, lighting: { ambient: 0.6, diffuse: 0.6 } }));
  }
  if (pedestal.length) {
    traces.push(meshTrace("pedestal", pedestal, { color: palette["robot-edge"], opacity: 1 }));
  }
  if (keepOuts.length) {
    traces.push(meshTrace("keep-out zones", keepOuts, { color: palette.bad, opacity: 0.12 }));
  }
  if (scene.targets.length) {
    traces.push(...targetTriads(scene.targets, palette), {
      type: "scatter3d",
      mode: "markers",
      name: "cell targets",
      x: scene.targets.map((t) => t.position_mm[0]),
      y: scene.targets.map((t) => t.position_mm[1]),
      z: scene.targets.map((t) => t.position_mm[2]),
      text: scene.targets.map((t) => t.name),
      marker: { size: 3, color: palette.target },
      hovertemplate: "%{text}<extra></extra>",
      showlegend: false,
    });
  }
  for (const path of scene.paths) {
    traces.push({
      type: "scatter3d",
      mode: "lines",
      name: `path ${path.name}`,
      x: path.waypoints.map((w) => w.position_mm[0]),
      y: path.waypoints.map((w) => w.position_mm[1]),
      z: path.waypoints.map((w) => w.position_mm[2]),
      line: { color: palette["ink-muted"], width: 2, dash: "dash" },
      hoverinfo: "skip",
      showlegend: false,
    });
  }
  return traces;
}

/**
 * @param {{element: HTMLElement, store: object, palette: object}} options
 * @returns {{render: Function, armDrawn: Promise<void>}} armDrawn: resolved once the view has
 *   drawn the arm for the first time (the page's first answer; other 3D drawing waits for it)
 */
export function createSceneView({ element, store, palette }) {
  let staticKey = null;
  let dynamicStart = 0;
  let markArmDrawn = null;
  const armDrawn = new Promise((resolve) => {
    markArmDrawn = resolve;
  });

  function staticTraces(state) {
    const { robot, cell, cellActive } = state;
    const range = cubeRanges(viewBounds(state));
    const floorZ = cellActive && cell ? cell.scene.floor_height_mm : Math.min(0, robot.bounds_mm[0][2]);
    const [fx, fy] = [range[0], range[1]];
    const base = cellActive && cell ? cell.scene.base : { position_mm: [0, 0, 0], rpy_deg: [0, 0, 0] };
    const data = [
      {
        type: "mesh3d",
        name: "floor",
        x: [fx[0], fx[1], fx[1], fx[0]],
        y: [fy[0], fy[0], fy[1], fy[1]],
        z: [floorZ, floorZ, floorZ, floorZ],
        i: [0, 0],
        j: [1, 2],
        k: [2, 3],
        color: "#dfe5ea",
        opacity: 0.5,
        hoverinfo: "skip",
        showlegend: false,
      },
      ...triadTraces({ origin: base.position_mm, rotation: matrixFromRpyDeg(base.rpy_deg), name: "base", palette, width: 3 }),
    ];
    if (cellActive && cell) {
      data.push(...cellTraces(cell.scene, palette, state.meshes));
    }
    return { data, range };
  }

  /** The traces that move: arm, chain, TCP and its triad, target and its triad (fixed count). */
  function dynamicTraces(state) {
    const { fk, target, robotMeshes, showCapsules } = state;
    const level = currentArmSeverity(state).level;
    const hidden = { x: [], y: [], z: [] };
    const arm = { x: [], y: [], z: [], i: [], j: [], k: [] };
    if (fk && drawsMeshes({ fk, robotMeshes, showCapsules })) {
      for (const mesh of robotMeshes) {
        const start = arm.x.length;
        for (const [x, y, z] of posedVertices(mesh, linkPose(fk, mesh.link))) {
          arm.x.push(x);
          arm.y.push(y);
          arm.z.push(z);
        }
        for (const [a, b, c] of mesh.faces) {
          arm.i.push(start + a);
          arm.j.push(start + b);
          arm.k.push(start + c);
        }
      }
    } else if (fk && fk.capsules) {
      fk.capsule_segments_mm.forEach(([start, end], index) => appendCapsuleMesh(arm, start, end, fk.capsules[index].radius_mm));
    }
    const frames = fk ? fk.frames_position_mm : [];
    const tcp = fk ? fk.position_mm : null;
    return [
      {
        type: "mesh3d",
        name: "arm",
        ...arm,
        color: levelColour(palette, level, palette.robot),
        meta: { role: "arm", level },
        opacity: 1,
        flatshading: false,
        lighting: { ambient: 0.55, diffuse: 0.7, specular: 0.15, roughness: 0.6 },
        lightposition: { x: 2000, y: -3000, z: 5000 },
        hoverinfo: "skip",
        showlegend: false,
      },
      {
        type: "scatter3d",
        mode: "lines+markers",
        name: "chain",
        x: frames.map((p) => p[0]),
        y: frames.map((p) => p[1]),
        z: frames.map((p) => p[2]),
        line: { color: palette.ink, width: 3 },
        marker: { size: 2.5, color: palette.ink },
        hoverinfo: "skip",
        showlegend: false,
      },
      {
        type: "scatter3d",
        mode: "markers",
        name: "TCP",
        ...(tcp ? { x: [tcp[0]], y: [tcp[1]], z: [tcp[2]] } : hidden),
        marker: { size: 4, color: palette.tool },
        hovertemplate: "TCP<br>x %{x:.1f} mm<br>y %{y:.1f} mm<br>z %{z:.1f} mm<extra></extra>",
        showlegend: false,
      },
      ...(fk
        ? triadTraces({ origin: fk.position_mm, rotation: matrixFromQuaternion(fk.quaternion_wxyz), name: "TCP", palette })
        : triadTraces({ origin: [0, 0, 0], rotation: matrixFromRpyDeg([0, 0, 0]), name: "TCP", palette }).map((trace) => ({ ...trace, ...hidden }))),
      {
        type: "scatter3d",
        mode: "markers",
        name: "target",
        ...(target ? { x: [target.position_mm[0]], y: [target.position_mm[1]], z: [target.position_mm[2]] } : hidden),
        marker: { size: 6, symbol: "diamond", color: palette.target },
        hovertemplate: "target<br>x %{x:.1f} mm<br>y %{y:.1f} mm<br>z %{z:.1f} mm<extra></extra>",
        showlegend: false,
      },
      ...triadTraces({
        origin: target ? target.position_mm : [0, 0, 0],
        rotation: matrixFromRpyDeg(target ? target.rpy_deg : [0, 0, 0]),
        name: "target",
        palette,
        dash: "dash",
        width: 3,
      }).map((trace) => (target ? trace : { ...trace, ...hidden })),
    ];
  }

  function layoutFor(state, range) {
    return layout3d({
      axes: ["x", "y", "z"].map((name, k) => ({ ...axis3d(`${name} (mm)`, range[k]), zerolinecolor: "#b9c3cb" })),
      camera: { eye: { x: 1.3, y: -1.45, z: 0.75 }, center: { x: 0, y: 0, z: -0.12 }, up: { x: 0, y: 0, z: 1 } },
      revision: `${state.robot.robot}|${state.cellActive}`,
    });
  }

  function render() {
    const state = store.get();
    if (!state.robot) {
      return;
    }
    const key = `${state.robot.robot}|${state.cellActive}|${state.cell ? state.cell.etag : ""}|${meshKey(state.meshes)}`;
    const dynamic = dynamicTraces(state);
    if (key !== staticKey || !element.data) {
      const { data, range } = staticTraces(state);
      dynamicStart = data.length;
      staticKey = key;
      shown(state, draw(element, [...data, ...dynamic], layoutFor(state, range)));
      return;
    }
    // only the moving traces: one restyle, the cell's meshes are left alone
    // (an undefined entry leaves that trace's attribute as it is)
    const update = {};
    for (const name of ["x", "y", "z", "i", "j", "k", "color", "meta"]) {
      update[name] = dynamic.map((trace) => trace[name]);
    }
    shown(state, Plotly.restyle(element, update, dynamic.map((_, k) => dynamicStart + k)));
  }

  /** A drawing with the arm (forward kinematics in) resolves `armDrawn` once it is done. */
  function shown(state, drawing) {
    if (state.fk) {
      drawing.then(() => markArmDrawn());
    }
  }

  const requestRender = frameScheduler({
    render,
    hold: () => store.get().dragging || !kinematicsSettled(store.get()),
  });
  store.subscribe(requestRender, { keys: ["robot", "fk", "target", "dragging", "cell", "cellActive", "armState", "meshes", "robotMeshes", "showCapsules"] });
  return { render, armDrawn };
}
