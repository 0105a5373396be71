// A 2D orthographic view of the cell: plan (x-y, seen from above) or
// elevation (x-z, seen from the -y side). The arm's capsules project to
// stadium outlines; the target can be dragged, typed (target panel) or nudged
// with the keyboard. The target is drawn on an SVG layer above the plot, so
// moving it costs no plot redraw; the arm is redrawn at most every
// ARM_REDRAW_MS while it follows a drag, by restyling its own traces only:
// they live in a light top figure over a base figure holding the axes and the
// cell (two layers with the same plot area), so a restyle redraws no outline.
// The cell's solids are drawn as outlines (keep-out zones dashed), the other
// targets as small markers (click one to select it) and paths as polylines.

/* global Plotly */

import { attachDrag, draw, layout2d, pointerFromData, topLayout } from "./plotting.js";
import { frameScheduler } from "./frame.js";
import { projectedOutline } from "./shapes.js";
import { viewBounds } from "./scene3d.js";
import { matrixFromRpyDeg, column } from "../rotation.js";
import { snapToStep } from "../units.js";

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
}) {
  const [h, v] = axes;
  const third = [0, 1, 2].find((k) => k !== h && k !== v);
  let dragging = false;

  function ranges(state) {
    const [low, high] = viewBounds(state);
    const pad = 0.12 * Math.max(high[0] - low[0], high[1] - low[1], high[2] - low[2], 200);
    return { x: paddedRange(low[h], high[h], pad), y: paddedRange(low[v], high[v], pad) };
  }

  function reachTrace(section) {
    return {
      type: "heatmap",
      name: "reach",
      x: section.u_mm,
      y: section.v_mm,
      z: section.count.map((row) => row.map((count) => (count > 0 ? count / section.directions : null))),
      zmin: 0,
      zmax: 1,
      colorscale: [[0, "rgba(0, 158, 115, 0.12)"], [1, "rgba(0, 158, 115, 0.55)"]],
      showscale: false,
      hoverinfo: "skip",
      zsmooth: false,
      meta: { role: "reach", value_mm: section.value_mm },
    };
  }

  function cellTraces(scene) {
    const traces = [];
    const styles = {
      fixture: { fill: "toself", fillcolor: "rgba(200, 191, 174, 0.45)", line: { color: "#8a7f6c", width: 1 } },
      pedestal: { fill: "toself", fillcolor: "rgba(74, 93, 107, 0.35)", line: { color: palette["robot-edge"], width: 1 } },
      keep_out: { fill: "toself", fillcolor: "rgba(213, 94, 0, 0.06)", line: { color: palette.bad, width: 1, dash: "dash" } },
    };
    for (const role of ["keep_out", "fixture", "pedestal"]) {
      const xs = [];
      const ys = [];
      for (const shape of scene.shapes.filter((s) => s.role === role)) {
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

  function robotTraces(fk) {
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
    const frames = fk ? fk.frames_position_mm : [];
    const tcp = fk ? [fk.position_mm] : [];
    return [
      {
        name: "arm",
        x: xs,
        y: ys,
        mode: "lines",
        fill: "toself",
        fillcolor: "rgba(143, 166, 184, 0.55)",
        line: { color: palette["robot-edge"], width: 1 },
        connectgaps: false,
      },
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

  const approach = document.createElementNS(SVG, "line");
  approach.setAttribute("class", "pb-target-approach");
  const mark = document.createElementNS(SVG, "path");
  mark.setAttribute("class", "pb-target-mark");
  mark.setAttribute("d", "M 0 -9 L 9 0 L 0 9 L -9 0 Z");
  overlay.append(approach, mark);

  /**
   * Place the target diamond and its approach line (tool z axis) on the overlay.
   * Positions come from the figure's own plot-area size and ranges (the overlay
   * covers the figure exactly), so a drag reads no layout from the page.
   */
  function placeTarget() {
    const { target } = store.get();
    const full = element._fullLayout;
    const ready = target && full && full._size && full.xaxis && full.yaxis;
    overlay.style.display = ready ? "" : "none";
    if (!ready) {
      return;
    }
    const { l, t, w, h: height } = full._size;
    const [xr, yr] = [full.xaxis.range, full.yaxis.range];
    const toOverlay = (x, y) => [
      l + ((x - xr[0]) / (xr[1] - xr[0])) * w,
      t + ((yr[1] - y) / (yr[1] - yr[0])) * height,
    ];
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

  let staticKey = null;

  function render() {
    const state = store.get();
    const { robot, fk, cell, cellActive } = state;
    if (!robot) {
      return;
    }
    const arm = robotTraces(fk && fk.capsules ? fk : null);
    const reach = state.showReach && state[reachKey] ? state[reachKey] : null;
    const key = `${robot.robot}|${cellActive}|${cell ? cell.etag : ""}|${reach ? `${reach.cell_etag}|${reach.requested_mm}` : "none"}`;
    if (key === staticKey && element.data) {
      const update = { x: arm.map((trace) => trace.x), y: arm.map((trace) => trace.y) };
      Plotly.restyle(element, update, arm.map((_, k) => k)).then(placeTarget);
      return;
    }
    staticKey = key;
    const range = ranges(state);
    const data = reach && cellActive ? [reachTrace(reach)] : [];
    if (cellActive && cell) {
      data.push(...cellTraces(cell.scene));
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
    draw(base, data, layout);
    draw(element, arm, topLayout(layout)).then(placeTarget);
  }

  const requestRender = frameScheduler({
    render,
    minIntervalMs: () => (store.get().dragging ? ARM_REDRAW_WHILE_DRAGGING_MS : ARM_REDRAW_MS),
  });
  store.subscribe(requestRender, { keys: ["robot", "fk", "cell", "cellActive", "showReach", reachKey] });
  store.subscribe(placeTarget, { keys: ["target"] });
  new ResizeObserver(placeTarget).observe(element);

  function movedTarget(point) {
    const { target, snap, stepMm } = store.get();
    const position = [...target.position_mm];
    position[h] = snap ? snapToStep(point.x, stepMm) : point.x;
    position[v] = snap ? snapToStep(point.y, stepMm) : point.y;
    return { ...target, position_mm: position };
  }

  attachDrag({
    figure: element,
    onDragging: (active) => actions.setDragging(active, "target"),
    onPress: (point, event) => {
      const { target, cell, cellActive } = store.get();
      if (!target) {
        return false;
      }
      const marker = pointerFromData(element, target.position_mm[h], target.position_mm[v]);
      const distance = Math.hypot(marker.clientX - event.clientX, marker.clientY - event.clientY);
      if (cellActive && cell) {
        const hit = cell.scene.targets.find((other) => {
          const at = pointerFromData(element, other.position_mm[h], other.position_mm[v]);
          return Math.hypot(at.clientX - event.clientX, at.clientY - event.clientY) <= 6;
        });
        const onSelected = distance <= 6;
        if (hit && !onSelected) {
          actions.select({ kind: "target", name: hit.name });
          return false;
        }
      }
      const near = distance <= GRAB_RADIUS_PX;
      if (near) {
        dragging = true;
        element.focus({ preventScroll: true });
      }
      return near;
    },
    onMove: (point, event) => {
      if (dragging) {
        actions.setTarget(movedTarget(point), { inputAt: event.timeStamp });
      }
    },
    onRelease: () => {
      dragging = false;
    },
  });

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
    actions.nudgeTarget(move[0], move[1] * (event.shiftKey ? 10 : 1), { inputAt: event.timeStamp });
  });

  return { render };
}
