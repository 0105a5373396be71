// A 2D orthographic view of the cell: plan (x-y, seen from above) or
// elevation (x-z, seen from the -y side). The arm's capsules project to
// stadium outlines; the target can be dragged, typed (target panel) or nudged
// with the keyboard, and so can a selected fixture (square marker; the keys
// nudge the fixture while one is selected). Target and fixture markers are
// drawn on an SVG layer above the plot, so moving them costs no plot redraw
// (a fixture moved but not yet saved shows its solids and targets, and those of
// the fixtures under it, at their new place on that layer); the arm is redrawn at most every
// ARM_REDRAW_MS while it follows a drag, by restyling its own traces only:
// they live in a light top figure over a base figure holding the axes and the
// cell (two layers with the same plot area), so a restyle redraws no outline.
// The cell's solids are drawn as outlines (keep-out zones dashed), the other
// targets as small markers (click one to select it) and paths as polylines.

/* global Plotly */

import { currentArmSeverity, levelColour } from "../severity.js";
import { attachDrag, dataFromPointer, draw, gridImage, layout2d, pointerFromData, topLayout } from "./plotting.js";
import { frameScheduler } from "./frame.js";
import { convexHull, projectedOutline, shapePoints } from "./shapes.js";
import { meshKey, viewBounds } from "./scene3d.js";
import { drawsMeshes, lighten, linkPose, silhouetteTrace } from "./mesh_draw.js";
import { fixtureFamily, selectedFixture } from "../selection.js";
import { matrixFromRpyDeg, column, rigidMotion } from "../rotation.js";
import { snapToStep } from "../units.js";
import { withAlpha } from "../palette.js";

const AXIS_NAMES = ["x", "y", "z"];
const GRAB_RADIUS_PX = 18;
const STADIUM_STEPS = 10;
const APPROACH_LENGTH_MM = 120;
const ARM_REDRAW_MS = 80;
// while a target is dragged the arm follows less often: the drag's own update
// (target and solution markers) comes first
const ARM_REDRAW_WHILE_DRAGGING_MS = 250;
const SVG = "http://www.w3.org/2000/svg";

/**
 * Outline of the orthographic projection of a capsule onto a plane: the
 * projected segment swept by a disc of the capsule's radius (a "stadium").
 */
export function stadiumOutline([ax, ay], [bx, by], radius) {
  const dx = bx - ax;
  const dy = by - ay;
  const heading = Math.hypot(dx, dy) > 1e-9 ? Math.atan2(dy, dx) : 0;
  const xs = [];
  const ys = [];
  for (let k = 0; k <= STADIUM_STEPS; k += 1) {
    const angle = heading - Math.PI / 2 + (Math.PI * k) / STADIUM_STEPS;
    xs.push(bx + radius * Math.cos(angle));
    ys.push(by + radius * Math.sin(angle));
  }
  for (let k = 0; k <= STADIUM_STEPS; k += 1) {
    const angle = heading + Math.PI / 2 + (Math.PI * k) / STADIUM_STEPS;
    xs.push(ax + radius * Math.cos(angle));
    ys.push(ay + radius * Math.sin(angle));
  }
  xs.push(xs[0]);
  ys.push(ys[0]);
  return { xs, ys };
}

function paddedRange(lower, upper, pad) {
  return [lower - pad, upper + pad];
}

/**
 * @param {{element: HTMLElement, base: HTMLElement, overlay: SVGElement, store: object, actions: object,
 *          palette: object, axes: [number, number], depthAxis: number, viewerSide: 1 | -1}} options
 *   element: the top figure (arm, events); base: the figure under it (axes, cell);
 *   reachKey: the store key of this view's reach section (drawn under the cell when shown).
 *   axes: indices of the horizontal and vertical data axes (0 x, 1 y, 2 z);
 *   depthAxis: the viewing direction's axis; viewerSide: the viewer sits on its
 *   positive (1) or negative (-1) side. Farther capsules are drawn first.
 *   onDropFile (optional): called with (file, position_mm) when a file is dropped on the
 *   view, position_mm the drop point on the view's axes with the floor height (plan) or 0.
 */
export function createProjectionView({
  element,
  base,
  overlay,
  store,
  actions,
  palette,
  axes,
  depthAxis,
  viewerSide,
  reachKey,
  onDropFile = null,
  onMoveCarriage = null,
}) {
  const [h, v] = axes;
  const third = [0, 1, 2].find((k) => k !== h && k !== v);
  let dragged = null; // "target", "fixture" or "carriage" while a drag is in progress

  function ranges(state) {
    const [low, high] = viewBounds(state);
    const pad = 0.12 * Math.max(high[0] - low[0], high[1] - low[1], high[2] - low[2], 200);
    return { x: paddedRange(low[h], high[h], pad), y: paddedRange(low[v], high[v], pad) };
  }

  /** The reach section as a layout image under the cell (the server's picture of it, rows v, columns u). */
  function reachImages(section) {
    if (!section || !section.picture) {
      return [];
    }
    return [gridImage(section.picture, section.u_mm, section.v_mm, { name: "reach" })];
  }

  /** Mesh fixtures whose triangles have arrived: filled silhouettes in their own colours. */
  function meshSilhouettes(scene, meshes) {
    return scene.shapes
      .filter((s) => s.shape === "mesh" && meshes[s.name] && meshes[s.name].mesh_version === s.mesh_version)
      .sort((a, b) => viewerSide * (a.position_mm[depthAxis] - b.position_mm[depthAxis]))
      .map((s) =>
        silhouetteTrace(meshes[s.name].flat, s, h, v, {
          name: s.name,
          colour: lighten(s.colour || palette.fixture, 0.35),
          meta: { role: "mesh-fixture", fixture: s.name },
        }),
      );
  }

  function cellTraces(scene, meshes) {
    const traces = meshSilhouettes(scene, meshes);
    const drawn = new Set(traces.map((trace) => trace.name));
    const styles = {
      fixture: { fill: "toself", fillcolor: withAlpha(palette.fixture, 0.45), line: { color: palette["fixture-edge"], width: 1 } },
      pedestal: { fill: "toself", fillcolor: withAlpha(palette["robot-edge"], 0.35), line: { color: palette["robot-edge"], width: 1 } },
      keep_out: { fill: "toself", fillcolor: withAlpha(palette.bad, 0.06), line: { color: palette.bad, width: 1, dash: "dash" } },
    };
    for (const role of ["keep_out", "fixture", "pedestal"]) {
      const xs = [];
      const ys = [];
      for (const shape of scene.shapes.filter((s) => s.role === role && !drawn.has(s.name))) {
        const outline = projectedOutline(shape, h, v);
        xs.push(...outline.xs, null);
        ys.push(...outline.ys, null);
      }
      if (xs.length) {
        traces.push({ name: role, x: xs, y: ys, mode: "lines", connectgaps: false, hoverinfo: "skip", ...styles[role] });
      }
    }
    for (const path of scene.paths) {
      traces.push({
        name: `path ${path.name}`,
        x: path.waypoints.map((w) => w.position_mm[h]),
        y: path.waypoints.map((w) => w.position_mm[v]),
        mode: "lines",
        line: { color: palette["ink-muted"], width: 1, dash: "dot" },
        hoverinfo: "skip",
      });
    }
    traces.push({
      name: "cell targets",
      x: scene.targets.map((target) => target.position_mm[h]),
      y: scene.targets.map((target) => target.position_mm[v]),
      mode: "markers",
      marker: { size: 7, symbol: "diamond-open", color: palette.target, line: { width: 1.5 } },
      meta: { role: "cell-targets" },
    });
    return traces;
  }

  function robotTraces(fk, state, level) {
    const armColour = levelColour(palette, level, palette.robot);
    const edgeColour = levelColour(palette, level, palette["robot-edge"]);
    if (fk && drawsMeshes({ fk, robotMeshes: state.robotMeshes, showCapsules: state.showCapsules })) {
      return [meshSilhouette(fk, state.robotMeshes, armColour, level), ...chainTraces(fk)];
    }
    const segments = fk ? fk.capsule_segments_mm : [];
    const order = segments
      .map((segment, index) => ({
        index,
        depth: (viewerSide * (segment[0][depthAxis] + segment[1][depthAxis])) / 2,
      }))
      .sort((a, b) => a.depth - b.depth);
    const xs = [];
    const ys = [];
    for (const { index } of order) {
      const [start, end] = fk.capsule_segments_mm[index];
      const outline = stadiumOutline([start[h], start[v]], [end[h], end[v]], fk.capsules[index].radius_mm);
      xs.push(...outline.xs, null);
      ys.push(...outline.ys, null);
    }
    return [
      {
        name: "arm",
        x: xs,
        y: ys,
        mode: "lines",
        fill: "toself",
        fillcolor: withAlpha(armColour, 0.55),
        line: { color: edgeColour, width: level === "ok" ? 1 : 2 },
        meta: { role: "arm", level },
        connectgaps: false,
      },
      ...chainTraces(fk),
    ];
  }

  /** The robot's link meshes as one filled silhouette (mesh_draw.js), in the "arm" trace. */
  function meshSilhouette(fk, meshes, colour, level) {
    const xs = [];
    const ys = [];
    for (const mesh of meshes) {
      const trace = silhouetteTrace(mesh, linkPose(fk, mesh.link), h, v, { name: "arm", colour });
      xs.push(...trace.x);
      ys.push(...trace.y);
    }
    return {
      name: "arm",
      x: xs,
      y: ys,
      mode: "lines",
      fill: "toself",
      fillcolor: colour,
      line: { color: colour, width: 0.5 },
      meta: { role: "arm", level },
      connectgaps: false,
    };
  }

  /** The kinematic chain and the TCP marker. */
  function chainTraces(fk) {
    const frames = fk ? fk.frames_position_mm : [];
    const tcp = fk ? [fk.position_mm] : [];
    return [
      {
        name: "chain",
        x: frames.map((p) => p[h]),
        y: frames.map((p) => p[v]),
        mode: "lines+markers",
        line: { color: palette.ink, width: 1.5 },
        marker: { size: 4, color: palette.ink },
      },
      {
        name: "TCP",
        x: tcp.map((p) => p[h]),
        y: tcp.map((p) => p[v]),
        mode: "markers",
        marker: { size: 9, symbol: "circle-open", color: palette.tool, line: { width: 2 } },
      },
    ];
  }

  const svgNode = (tag, className) => {
    const node = document.createElementNS(SVG, tag);
    node.setAttribute("class", className);
    return node;
  };
  const fixturePreview = svgNode("path", "pb-fixture-preview");
  const fixtureMark = svgNode("path", "pb-fixture-mark");
  fixtureMark.setAttribute("d", "M -7 -7 H 7 V 7 H -7 Z M -3 0 H 3 M 0 -3 V 3");
  const approach = svgNode("line", "pb-target-approach");
  const mark = svgNode("path", "pb-target-mark");
  mark.setAttribute("d", "M 0 -9 L 9 0 L 0 9 L -9 0 Z");
  overlay.append(fixturePreview, fixtureMark, approach, mark);

  /**
   * Data (mm) to overlay pixel coordinates, from the figure's own plot-area size
   * and ranges (the overlay covers the figure exactly), so a drag reads no
   * layout from the page; null before the figure is drawn.
   */
  function overlayMapping() {
    const full = element._fullLayout;
    if (!(full && full._size && full.xaxis && full.yaxis)) {
      return null;
    }
    const { l, t, w, h: height } = full._size;
    const [xr, yr] = [full.xaxis.range, full.yaxis.range];
    return (x, y) => [l + ((x - xr[0]) / (xr[1] - xr[0])) * w, t + ((yr[1] - y) / (yr[1] - yr[0])) * height];
  }

  /** The selected fixture's pose on the page (the one dragged), or null. */
  function movableFixture(state) {
    const drawn = selectedFixture(state);
    return drawn && state.fixture && state.fixture.name === drawn.name ? state.fixture : null;
  }

  /** Place the target diamond and its approach line (tool z axis), and the fixture marker, on the overlay. */
  function placeMarkers() {
    const toOverlay = overlayMapping();
    overlay.style.display = toOverlay ? "" : "none";
    if (toOverlay) {
      placeTarget(toOverlay);
      placeFixture(toOverlay);
    }
  }

  function placeTarget(toOverlay) {
    const { target } = store.get();
    for (const node of [mark, approach]) {
      node.style.display = target ? "" : "none";
    }
    if (!target) {
      return;
    }
    const axis = column(matrixFromRpyDeg(target.rpy_deg), 2);
    const [px, py] = [target.position_mm[h], target.position_mm[v]];
    const [x, y] = toOverlay(px, py);
    const [tx, ty] = toOverlay(px + APPROACH_LENGTH_MM * axis[h], py + APPROACH_LENGTH_MM * axis[v]);
    mark.setAttribute("transform", `translate(${x.toFixed(1)} ${y.toFixed(1)})`);
    approach.setAttribute("x1", x.toFixed(1));
    approach.setAttribute("y1", y.toFixed(1));
    approach.setAttribute("x2", tx.toFixed(1));
    approach.setAttribute("y2", ty.toFixed(1));
  }

  /**
   * The selected fixture's marker at its page pose; while that differs from the
   * saved one, its solids and targets (and those of the fixtures under it) drawn
   * moved with it, as outlines on the overlay.
   */
  function placeFixture(toOverlay) {
    const state = store.get();
    const moved = movableFixture(state);
    fixtureMark.style.display = moved ? "" : "none";
    fixturePreview.style.display = "none";
    if (!moved) {
      return;
    }
    const [x, y] = toOverlay(moved.position_mm[h], moved.position_mm[v]);
    fixtureMark.setAttribute("transform", `translate(${x.toFixed(1)} ${y.toFixed(1)})`);
    const drawn = selectedFixture(state);
    const still = [...drawn.position_mm, ...drawn.rpy_deg].every(
      (value, k) => value === [...moved.position_mm, ...moved.rpy_deg][k],
    );
    if (still) {
      return;
    }
    const carry = rigidMotion(drawn, moved);
    const family = fixtureFamily(state.cell.scene.fixtures, drawn.name);
    const pixel = (point) => {
      const p = carry(point);
      return toOverlay(p[h], p[v]);
    };
    const outline = (points) => `M ${points.map(([px, py]) => `${px.toFixed(1)} ${py.toFixed(1)}`).join(" L ")} Z`;
    const parts = state.cell.scene.shapes
      .filter((shape) => shape.role === "fixture" && family.has(shape.name))
      .map((shape) => outline(convexHull(shapePoints(shape).map(pixel))));
    for (const target of state.cell.scene.targets.filter((t) => family.has(t.fixture))) {
      const [tx, ty] = pixel(target.position_mm);
      parts.push(outline([[tx, ty - 5], [tx + 5, ty], [tx, ty + 5], [tx - 5, ty]]));
    }
    fixturePreview.setAttribute("d", parts.join(" "));
    fixturePreview.style.display = "";
  }

  let staticKey = null;

  function render() {
    const state = store.get();
    const { robot, fk, cell, cellActive } = state;
    if (!robot) {
      return;
    }
    const arm = robotTraces(fk && fk.capsules ? fk : null, state, currentArmSeverity(state).level);
    const reach = state.showReach && state[reachKey] ? state[reachKey] : null;
    const key = `${robot.robot}|${cellActive}|${cell ? cell.etag : ""}|${meshKey(state.meshes)}|${reach ? `${reach.cell_etag}|${reach.requested_mm}` : "none"}`;
    if (key === staticKey && element.data) {
      const update = {
        x: arm.map((trace) => trace.x),
        y: arm.map((trace) => trace.y),
        fillcolor: arm.map((trace) => trace.fillcolor),
        "line.color": arm.map((trace) => trace.line && trace.line.color),
        "line.width": arm.map((trace) => trace.line && trace.line.width),
        meta: arm.map((trace) => trace.meta),
      };
      Plotly.restyle(element, update, arm.map((_, k) => k)).then(placeMarkers);
      return;
    }
    staticKey = key;
    const range = ranges(state);
    const data = [];
    if (cellActive && cell) {
      data.push(...cellTraces(cell.scene, state.meshes));
    }
    const layout = layout2d({
      xTitle: `${AXIS_NAMES[h]} (mm)`,
      yTitle: `${AXIS_NAMES[v]} (mm)`,
      xRange: range.x,
      yRange: range.y,
      equalAspect: true,
      palette,
    });
    layout.uirevision = `${robot.robot}|${cellActive}`;
    layout.images = reach && cellActive ? reachImages(reach) : [];
    draw(base, data, layout);
    draw(element, arm, topLayout(layout)).then(placeMarkers);
  }

  const requestRender = frameScheduler({
    render,
    minIntervalMs: () => (store.get().dragging ? ARM_REDRAW_WHILE_DRAGGING_MS : ARM_REDRAW_MS),
  });
  store.subscribe(requestRender, { keys: ["robot", "fk", "cell", "cellActive", "showReach", reachKey, "armState", "meshes", "robotMeshes", "showCapsules"] });
  store.subscribe(placeMarkers, { keys: ["target", "fixture", "selection"] });
  new ResizeObserver(placeMarkers).observe(element);

  /** The cell's track drawing while the page shows the cell, or null. */
  function trackAxis(state) {
    if (!state.cellActive || !state.cell) {
      return null;
    }
    return (state.cell.scene.external_axes || []).find((axis) => axis.kind === "track") || null;
  }

  /** Squared length of the track's direction in this view's two axes (0: the rail points at the viewer). */
  function alongView(track) {
    return track.direction[h] ** 2 + track.direction[v] ** 2;
  }

  /**
   * The track value (mm) under the pointer: the carriage's drawn value plus the pointer's
   * offset from it projected on the rail's direction in this view, kept in the range.
   */
  function carriageValue(track, point) {
    const d = track.direction;
    const p = track.position_mm;
    const offset = ((point.x - p[h]) * d[h] + (point.y - p[v]) * d[v]) / alongView(track);
    const { snap, stepMm } = store.get();
    const value = track.value + offset;
    return Math.min(track.upper, Math.max(track.lower, snap ? snapToStep(value, stepMm) : value));
  }

  /** A pose ({position_mm, ...}) moved to the pointer in this view's two axes. */
  function movedTo(pose, point) {
    const { snap, stepMm } = store.get();
    const position = [...pose.position_mm];
    position[h] = snap ? snapToStep(point.x, stepMm) : point.x;
    position[v] = snap ? snapToStep(point.y, stepMm) : point.y;
    return { ...pose, position_mm: position };
  }

  attachDrag({
    figure: element,
    onDragging: (active) => actions.setDragging(active, dragged || "target"),
    onPress: (point, event) => {
      const state = store.get();
      const { target, cell, cellActive, readOnly } = state;
      const pixelDistance = (position) => {
        const at = pointerFromData(element, position[h], position[v]);
        return Math.hypot(at.clientX - event.clientX, at.clientY - event.clientY);
      };
      const distance = target ? pixelDistance(target.position_mm) : Infinity;
      // the selected fixture is grabbed before the target when nearer (never on a reviewer's page)
      const fixture = readOnly ? null : movableFixture(state);
      if (fixture && pixelDistance(fixture.position_mm) <= Math.min(GRAB_RADIUS_PX, distance)) {
        dragged = "fixture";
        element.focus({ preventScroll: true });
        return true;
      }
      // the track's carriage: dragging it moves the track (the arm rides on it)
      const track = trackAxis(state);
      if (track && !readOnly && alongView(track) > 1e-6 && pixelDistance(track.position_mm) <= Math.min(GRAB_RADIUS_PX, distance)) {
        dragged = "carriage";
        element.focus({ preventScroll: true });
        return true;
      }
      if (!target) {
        return false;
      }
      if (cellActive && cell) {
        const hit = cell.scene.targets.find((other) => pixelDistance(other.position_mm) <= 6);
        const onSelected = distance <= 6;
        if (hit && !onSelected) {
          actions.select({ kind: "target", name: hit.name });
          return false;
        }
      }
      const near = distance <= GRAB_RADIUS_PX;
      if (near) {
        dragged = "target";
        element.focus({ preventScroll: true });
      }
      return near;
    },
    onMove: (point, event) => {
      const state = store.get();
      if (dragged === "target") {
        actions.setTarget(movedTo(state.target, point), { inputAt: event.timeStamp });
      } else if (dragged === "fixture" && state.fixture) {
        actions.setFixture(movedTo(state.fixture, point));
      } else if (dragged === "carriage") {
        actions.setCarriage(carriageValue(trackAxis(state), point));
      }
    },
    onRelease: () => {
      const carriage = dragged === "carriage" ? store.get().carriage : null;
      dragged = null;
      if (carriage && onMoveCarriage) {
        onMoveCarriage(carriage.value_mm);
      }
    },
  });

  if (onDropFile) {
    const wrap = element.parentElement;
    const carriesFiles = (event) => event.dataTransfer && [...event.dataTransfer.types].includes("Files");
    wrap.addEventListener("dragover", (event) => {
      if (carriesFiles(event)) {
        event.preventDefault();
        event.dataTransfer.dropEffect = "copy";
      }
    });
    wrap.addEventListener("drop", (event) => {
      if (!carriesFiles(event) || !element._fullLayout) {
        return;
      }
      event.preventDefault();
      const point = dataFromPointer(element, event);
      const { cell } = store.get();
      const position = [0, 0, 0];
      position[third] = cell && third === 2 ? cell.scene.floor_height_mm : 0;
      position[h] = point.x;
      position[v] = point.y;
      for (const file of event.dataTransfer.files) {
        onDropFile(file, position);
      }
    });
  }

  const KEYS = {
    ArrowRight: [h, 1],
    ArrowLeft: [h, -1],
    ArrowUp: [v, 1],
    ArrowDown: [v, -1],
    PageUp: [third, 1],
    PageDown: [third, -1],
  };
  element.addEventListener("keydown", (event) => {
    const move = KEYS[event.key];
    if (!move) {
      return;
    }
    event.preventDefault();
    const steps = move[1] * (event.shiftKey ? 10 : 1);
    if (movableFixture(store.get())) {
      actions.nudgeFixture(move[0], steps);
    } else {
      actions.nudgeTarget(move[0], steps, { inputAt: event.timeStamp });
    }
  });

  return { render };
}
