// The joint map: a plane through joint space over two chosen joints, with the
// cell's obstacle regions (one colour per obstacle, self collision shaded
// dark, clearance shaded grey: a picture drawn by the server), the joint-limit box, the current
// configuration and a marker for every inverse kinematics solution of the
// target, styled by arm branch. Clicking or dragging sets the two joints;
// clicking a marker takes that solution.
//
// The regions, axes and limit box are a base figure drawn only when a new map
// arrives; markers and the current configuration are a light top figure over
// it (same plot area) restyled in place, so a drag costs one small update per
// answer and never redraws the regions.

/* global Plotly */

import { sequenceKey, sequenceTraces } from "../sequencecurve.js";
import { currentArmSeverity, levelColour } from "../severity.js";
import { attachDrag, dataFromPointer, draw, gridImage, layout2d, pointerFromData, topLayout } from "./plotting.js";
import { frameScheduler } from "./frame.js";
import { branchHeading, branchPartsText, sameBranch } from "../branches.js";
import { branchStyle, regionColour } from "../palette.js";
import { clamp, formatJoint } from "../units.js";
import { axesExist, mapAxes, mapValues, solutionValue } from "../mapaxes.js";
import { shownTarget } from "../selection.js";

const PICK_RADIUS_PX = 12;

function axisTitle(joint) {
  return `${joint.name} (${joint.unit})`;
}

/** Axis range: the joint's limits, widened to show solutions outside them, plus a margin. */
function paddedRange(joint, values) {
  const lower = Math.min(joint.lower, ...values);
  const upper = Math.max(joint.upper, ...values);
  const pad = 0.04 * (upper - lower);
  return [lower - pad, upper + pad];
}

const BRANCH_SIGNS = { front: 1, back: -1, up: 1, down: -1, positive: 1, negative: -1 };

/** Branch signs of shoulder/elbow/wrist words ("front, up, positive"), for branchStyle. */
function branchSigns(words) {
  const signs = { shoulder: 0, elbow: 0, wrist: 0 };
  for (const word of words.split(",").map((w) => w.trim())) {
    const part = word === "front" || word === "back" ? "shoulder" : word === "up" || word === "down" ? "elbow" : "wrist";
    signs[part] = BRANCH_SIGNS[word] || 0;
  }
  return signs;
}

/**
 * The target check's feasible intervals of the selected cell target along a mapped external
 * axis, one line per branch in the margin below (or left of) the limit box, its ends marked in
 * the branch's colour. An empty trace when no mapped axis is external.
 */
export function intervalTrace(state, axes, [a, b], palette) {
  const slot = axes[a].external ? 0 : axes[b].external ? 1 : -1;
  const target = slot >= 0 && state.cell ? shownTarget(state) : null;
  const report = state.targetCheck && state.cell && state.targetCheck.etag === state.cell.etag ? state.targetCheck.report : null;
  const check = target && report ? report.targets.find((t) => t.name === target.name) : null;
  const along = [];
  const across = [];
  const colours = [];
  if (check) {
    const axis = axes[slot === 0 ? a : b];
    const other = axes[slot === 0 ? b : a];
    const found = (check.external_intervals || []).filter((f) => f.axis === axis.name);
    found.forEach((f, k) => {
      const level = other.lower - (0.004 + 0.0045 * k) * (other.upper - other.lower);
      const colour = branchStyle(palette, branchSigns(f.branch)).color;
      for (const [start, end] of f.intervals) {
        along.push(start, end, null);
        across.push(level, level, null);
        colours.push(colour, colour, colour);
      }
    });
  }
  return {
    type: "scatter",
    mode: "lines+markers",
    name: "reach intervals",
    x: slot === 1 ? across : along,
    y: slot === 1 ? along : across,
    line: { color: palette["ink-muted"], width: 2 },
    marker: { size: 7, symbol: "line-ns-open", color: colours },
    hoverinfo: "skip",
    meta: { role: "ik-intervals", target: check ? check.name : null },
  };
}

/**
 * The shown cell target's solutions along a mapped external axis (the map's ik_along_axis),
 * small markers in the branch colours: the IK markers of an external axis. Empty without one.
 */
export function alongAxisTrace(state, map, axes, [a, b], palette) {
  const slot = map && axes[a].external ? 0 : map && axes[b].external ? 1 : -1;
  const target = slot >= 0 && state.cell ? shownTarget(state) : null;
  const curve = target && map.ik_along_axis ? map.ik_along_axis.find((c) => c.target === target.name) : null;
  const along = [];
  const across = [];
  const colours = [];
  if (curve) {
    const values = map.axes_deg[slot];
    curve.branches.forEach((words, k) => {
      const colour = branchStyle(palette, branchSigns(words)).color;
      curve.joints_deg[k].forEach((joints, r) => {
        if (joints) {
          along.push(values[r]);
          across.push(joints[0]);
          colours.push(colour);
        }
      });
    });
  }
  return {
    type: "scatter",
    mode: "markers",
    name: "solutions along the axis",
    x: slot === 1 ? across : along,
    y: slot === 1 ? along : across,
    marker: { size: 5, symbol: "circle", color: colours },
    hoverinfo: "skip",
    meta: { role: "ik-along-axis", target: curve ? curve.target : null },
  };
}

function within(range, values) {
  return values.every((value) => value >= range[0] && value <= range[1]);
}

/** Name of the object colliding at joint values (x, y) of a two-joint map ("" if free). */
export function objectAt(map, x, y) {
  const [xs, ys] = map.axes_deg;
  const nearest = (values, v) => values.reduce((best, value, k) => (Math.abs(value - v) < Math.abs(values[best] - v) ? k : best), 0);
  const flat = nearest(xs, x) * map.shape[1] + nearest(ys, y);
  const k = map.obstacle[flat];
  if (k >= 0) {
    return map.obstacle_names[k];
  }
  return map.self_collision[flat] ? "arm itself" : "";
}

/**
 * The map's picture as a layout image of the base figure: the server draws the regions (one
 * colour per object, self collision dark, clearance shaded grey; results/map_images.py), one
 * pixel per grid cell, stretched over the cells. Hover names the object from the map's grid.
 */
export function regionImages(map) {
  if (!map || !map.picture) {
    return [];
  }
  return [gridImage(map.picture, map.axes_deg[0], map.axes_deg[1], { name: "regions" })];
}

/**
 * @param {{element: HTMLElement, base: HTMLElement, note: HTMLElement, legend: HTMLElement, header: HTMLElement,
 *          progress: HTMLElement, store: object, actions: object, palette: object, onCancelMap: Function}} options
 *   element: the top figure (markers, events); base: the figure under it (axes, regions);
 *   header: where the joint pair selectors go; note: the slice explanation;
 *   legend: the branch and region legend (HTML, so that it costs no plot redraw);
 *   progress: where the map computation's progress and cancel button go.
 */
export function createJointMapView({ element, base, note, legend, header, progress, store, actions, palette, onCancelMap }) {
  let lastRenderedIk = null;
  let legendKey = null;
  let baseKey = null;
  let ranges = null;
  let drawnInputs = null;
  const selectors = [0, 1].map((slot) => {
    const label = document.createElement("label");
    label.className = "pb-hint";
    label.textContent = slot === 0 ? "horizontal axis " : "vertical axis ";
    const select = document.createElement("select");
    select.setAttribute("aria-label", slot === 0 ? "Joint on the horizontal axis" : "Joint on the vertical axis");
    select.addEventListener("change", () => {
      const pair = [...store.get().mapJoints];
      pair[slot] = Number(select.value);
      if (pair[0] === pair[1]) {
        pair[1 - slot] = store.get().mapJoints[slot];
      }
      actions.setMapJoints(pair);
    });
    label.append(select);
    header.append(label);
    return select;
  });

  const bar = document.createElement("progress");
  bar.max = 1;
  bar.value = 0;
  bar.id = "map-progress";
  const barText = document.createElement("span");
  barText.className = "pb-hint";
  const cancel = document.createElement("button");
  cancel.type = "button";
  cancel.textContent = "Cancel";
  cancel.id = "map-cancel";
  cancel.addEventListener("click", () => onCancelMap());
  progress.append(bar, barText, cancel);

  function updateSelectors(state) {
    const { mapJoints } = state;
    const axes = mapAxes(state);
    selectors.forEach((select, slot) => {
      const names = axes.map((joint) => joint.name).join(",");
      if (select.dataset.names !== names) {
        select.replaceChildren(
          ...axes.map((joint, index) => new Option(`${joint.name} (${joint.unit})`, String(index))),
        );
        select.dataset.names = names;
      }
      select.value = String(mapJoints[slot]);
    });
  }

  function currentMap({ jointMap, mapJoints, cellActive }) {
    if (!cellActive || !jointMap || jointMap.joints[0] !== mapJoints[0] || jointMap.joints[1] !== mapJoints[1]) {
      return null;
    }
    return jointMap;
  }

  /** The moving traces: solution markers, selected-solution ring, current configuration, crosshair. */
  function dynamicTraces(state) {
    const { ik, mapJoints, selectedBranch } = state;
    const level = currentArmSeverity(state).level;
    const [a, b] = mapJoints;
    const axes = mapAxes(state);
    const joints = mapValues(state);
    const solutions = ik ? ik.result.solutions : [];
    const styles = solutions.map((solution) => branchStyle(palette, solution));
    const selected = solutions.find(
      (s) => sameBranch(s, selectedBranch) && s.joints_deg.every((value, k) => Math.abs(value - joints[k]) < 1e-6),
    );
    const [ja, jb] = [axes[a], axes[b]];
    return [
      {
        type: "scatter",
        mode: "markers",
        name: "solutions",
        x: solutions.map((s) => solutionValue(s, a, joints)),
        y: solutions.map((s) => solutionValue(s, b, joints)),
        customdata: solutions.map((_, index) => index),
        marker: {
          size: 14,
          color: styles.map((style) => style.color),
          symbol: solutions.map((s, k) => (s.within_limits ? styles[k].symbol : `${styles[k].symbol}-open`)),
          line: { color: "#ffffff", width: 1 },
        },
        meta: { role: "ik-solutions" },
      },
      {
        type: "scatter",
        mode: "markers",
        name: "selected solution",
        x: selected ? [solutionValue(selected, a, joints)] : [],
        y: selected ? [solutionValue(selected, b, joints)] : [],
        marker: { size: 24, symbol: "circle-open", color: palette.ink, line: { width: 2 } },
        hoverinfo: "skip",
      },
      {
        type: "scatter",
        mode: "lines",
        name: "crosshair",
        x: [joints[a], joints[a], null, ja.lower - 1e4, ja.upper + 1e4],
        y: [jb.lower - 1e4, jb.upper + 1e4, null, joints[b], joints[b]],
        line: { color: palette.ink, width: 0.6, dash: "dot" },
        hoverinfo: "skip",
      },
      {
        type: "scatter",
        mode: "markers",
        name: "current configuration",
        x: [joints[a]],
        y: [joints[b]],
        marker: {
          size: level === "ok" ? 16 : 22,
          symbol: "cross-thin-open",
          color: levelColour(palette, level, palette.ink),
          line: { width: level === "ok" ? 2.5 : 4 },
        },
        meta: { role: "current", level },
      },
      intervalTrace(state, axes, mapJoints, palette),
      alongAxisTrace(state, currentMap(state), axes, mapJoints, palette),
    ];
  }

  function fullRender(state, dynamic) {
    const { robot, mapJoints } = state;
    const [a, b] = mapJoints;
    const axes = mapAxes(state);
    const [ja, jb] = [axes[a], axes[b]];
    const map = currentMap(state);
    const data = sequenceTraces(state.sequence, [a, b], palette);
    ranges = {
      x: paddedRange(ja, dynamic[0].x),
      y: paddedRange(jb, dynamic[0].y),
    };
    const layout = layout2d({ xTitle: axisTitle(ja), yTitle: axisTitle(jb), xRange: ranges.x, yRange: ranges.y, palette });
    layout.shapes = [
      {
        type: "rect",
        xref: "x",
        yref: "y",
        x0: ja.lower,
        x1: ja.upper,
        y0: jb.lower,
        y1: jb.upper,
        line: { color: palette["limit-box"], width: 1.5, dash: "dash" },
        layer: "above",
      },
    ];
    layout.images = regionImages(map);
    layout.annotations = [
      {
        xref: "x",
        yref: "y",
        x: ja.lower,
        y: jb.upper,
        xanchor: "left",
        yanchor: "bottom",
        text: "joint limits",
        showarrow: false,
        font: { size: 11, color: palette["limit-box"] },
      },
    ];
    layout.uirevision = `${robot.robot}|${a}|${b}`;
    draw(base, data, layout);
    return draw(element, dynamic, topLayout(layout));
  }

  function render() {
    const state = store.get();
    const { robot, joints, ik, mapJoints } = state;
    if (!robot || joints.length !== robot.dof) {
      return;
    }
    if (!axesExist(mapAxes(state), mapJoints)) {
      // the mapped external axis left with the cell: back to the robot's first joints
      actions.setMapJoints(robot.dof >= 3 ? [1, 2] : [0, Math.min(1, robot.dof - 1)]);
      return;
    }
    const inputs = [state.robot, joints, ik, mapJoints, state.selectedBranch, state.jointMap, state.cellActive, state.armState, state.fk, state.sequence, state.cell, state.carriage, state.targetCheck, state.selection];
    if (drawnInputs && inputs.every((value, k) => value === drawnInputs[k])) {
      return; // already drawn (an answer drawn at once, then its frame request)
    }
    drawnInputs = inputs;
    updateSelectors(state);
    const dynamic = dynamicTraces(state);
    const map = currentMap(state);
    const key = `${robot.robot}|${mapJoints.join(",")}|${map ? `${map.cell_etag}|${map.hold_deg.join(",")}|${map.picture ? map.picture.length : 0}` : "no map"}|${sequenceKey(state.sequence)}`;
    let drawn;
    if (key !== baseKey || !element.data || !ranges || !within(ranges.x, dynamic[0].x) || !within(ranges.y, dynamic[0].y)) {
      baseKey = key;
      drawn = fullRender(state, dynamic);
    } else {
      const update = {
        x: dynamic.map((trace) => trace.x),
        y: dynamic.map((trace) => trace.y),
        customdata: dynamic.map((trace) => trace.customdata),
        "marker.color": dynamic.map((trace, k) => (k === 0 || k >= 3 ? trace.marker.color : undefined)),
        "marker.size": dynamic.map((trace, k) => (k === 3 ? trace.marker.size : undefined)),
        "marker.line.width": dynamic.map((trace, k) => (k === 3 ? trace.marker.line.width : undefined)),
        meta: dynamic.map((trace) => trace.meta),
        "marker.symbol": dynamic.map((trace, k) => (k === 0 ? trace.marker.symbol : undefined)),
      };
      drawn = Plotly.restyle(element, update, dynamic.map((_, k) => k));
    }
    renderLegend(ik ? ik.result.solutions : [], map);
    note.textContent = sliceNote(state, map);
    if (ik && ik !== lastRenderedIk) {
      lastRenderedIk = ik;
      drawn.then(() => {
        const renderedAt = performance.now();
        element.dispatchEvent(
          new CustomEvent("posebridge:ik-rendered", {
            bubbles: true,
            detail: {
              inputAt: ik.inputAt,
              renderedAt,
              elapsedMs: renderedAt - ik.inputAt,
              target: ik.target,
              solutionCount: ik.result.solutions.length,
            },
          }),
        );
      });
    }
  }

  function renderLegend(solutions, map) {
    const groups = new Map();
    for (const solution of solutions) {
      const style = branchStyle(palette, solution);
      const words = branchPartsText(solution) || "single branch";
      groups.set(`${style.key}|${words}`, { style, words });
    }
    const heading = groups.size ? `${branchHeading(solutions)}:` : "No solution for the target";
    const regions = map ? map.colliding_obstacles : [];
    const selfHit = map ? map.self_collision.some(Boolean) : false;
    const key = heading + [...groups.keys()].join(";") + regions.join(";") + selfHit;
    if (key === legendKey) {
      return;
    }
    legendKey = key;
    const swatch = (text, colour, className = "pb-swatch") => {
      const glyph = document.createElement("span");
      glyph.className = className;
      glyph.textContent = text;
      glyph.style.color = colour;
      return glyph;
    };
    const entries = [...groups.values()].map(({ style, words }) => {
      const entry = document.createElement("span");
      entry.append(swatch(style.glyph, style.color), ` ${words}`);
      return entry;
    });
    const title = document.createElement("span");
    title.className = "pb-legend-title";
    title.textContent = heading;
    const current = document.createElement("span");
    current.textContent = "✛ current configuration";
    const regionEntries = regions.map((name) => {
      const entry = document.createElement("span");
      entry.className = "pb-region";
      entry.append(swatch("■", regionColour(palette, map.colliding_obstacles.indexOf(name))), ` ${name}`);
      return entry;
    });
    if (selfHit) {
      const entry = document.createElement("span");
      entry.append(swatch("■", "rgba(29, 39, 48, 0.45)"), " self collision");
      regionEntries.push(entry);
    }
    const regionTitle = document.createElement("span");
    regionTitle.className = "pb-legend-title";
    regionTitle.textContent = regions.length || selfHit ? "In collision with:" : map ? "No collision on this slice" : "";
    legend.replaceChildren(title, ...entries, current, regionTitle, ...regionEntries);
  }

  function sliceNote(state, map) {
    const { mapJoints, cellActive } = state;
    const joints = mapValues(state);
    const axes = mapAxes(state);
    const others = axes
      .map((joint, index) => ({ joint, index }))
      .filter(({ index }) => !mapJoints.includes(index))
      .map(({ joint, index }) => `${joint.name} ${formatJoint(joints[index], joint.unit)}`);
    const held = others.length ? ` with ${others.join(", ")} held` : "";
    const external = mapJoints.some((index) => axes[index].external)
      ? " Along an external axis the scene is posed at every value; solution markers sit at the axis' current value, small markers trace the selected target's solutions along the axis, the lines beside the limit box are the selected target's reach intervals per branch (from the target check), and clicks set the robot joint (drag the carriage to move the track)."
      : "";
    const regions = !cellActive
      ? " Obstacle regions are shown for the cell's robot."
      : map
        ? " Coloured cells collide with the named object; grey shading darkens as the clearance falls below 300 mm."
        : " Obstacle regions are being computed.";
    return (
      `A slice through the current configuration${held}. ` +
      "Solution markers sit at each solution's own values of the two mapped joints; " +
      "their other joints differ from the slice, so a marker inside a region may still be free. " +
      `Open markers are outside the joint limits.${regions}${external}`
    );
  }

  function renderProgress() {
    const job = store.get().jointMapJob;
    const waiting = Boolean(job) && job.state === "waiting";
    const busy = Boolean(job) && (job.state === "queued" || job.state === "running" || waiting);
    // kept in the layout (only made invisible), so the map below never jumps
    progress.style.visibility = busy ? "visible" : "hidden";
    progress.dataset.state = busy ? job.state : "";
    bar.hidden = waiting;
    if (waiting) {
      barText.textContent = job.detail;
    } else if (busy) {
      bar.value = job.total ? job.done / job.total : 0;
      barText.textContent = job.total ? `Computing the map: ${job.done} of ${job.total} parts` : "Computing the map…";
    }
    barText.title = barText.textContent; // the whole text when one line cuts it short
  }

  const requestRender = frameScheduler({ render });
  store.subscribe(requestRender, {
    keys: ["robot", "joints", "ik", "mapJoints", "selectedBranch", "jointMap", "cellActive", "armState", "fk", "sequence", "cell", "carriage", "targetCheck", "selection"],
  });
  // a new inverse kinematics answer is drawn at once, not on the next frame: it is
  // what a drag waits for (the update is a small restyle of the top figure)
  store.subscribe(render, { keys: ["ik"] });
  store.subscribe(renderProgress, { keys: ["jointMapJob"] });
  renderProgress();

  function pickSolution(event) {
    const state = store.get();
    const { ik, mapJoints } = state;
    if (!ik) {
      return null;
    }
    const [a, b] = mapJoints;
    const values = mapValues(state);
    let best = null;
    let bestDistance = PICK_RADIUS_PX;
    for (const solution of ik.result.solutions) {
      const p = pointerFromData(element, solutionValue(solution, a, values), solutionValue(solution, b, values));
      const distance = Math.hypot(p.clientX - event.clientX, p.clientY - event.clientY);
      if (distance <= bestDistance) {
        best = solution;
        bestDistance = distance;
      }
    }
    return best;
  }

  function setPair(point) {
    const { robot, joints, mapJoints } = store.get();
    const [a, b] = mapJoints;
    const next = [...joints];
    // an external axis is not set from the map (the track moves with the carriage drag)
    if (a < robot.dof) {
      next[a] = clamp(point.x, robot.joints[a].lower, robot.joints[a].upper);
    }
    if (b < robot.dof) {
      next[b] = clamp(point.y, robot.joints[b].lower, robot.joints[b].upper);
    }
    actions.setJoints(next, { reason: "map" });
  }

  attachDrag({
    figure: element,
    onDragging: (active) => actions.setDragging(active, "joints"),
    onPress: (point, event) => {
      if (!store.get().robot) {
        return false;
      }
      element.focus({ preventScroll: true });
      const solution = pickSolution(event);
      if (solution) {
        actions.selectSolution(solution);
        return false;
      }
      setPair(point);
      return true;
    },
    onMove: (point) => setPair(point),
  });

  // hovering a region names its object (the regions are in the figure under this one)
  element.addEventListener("mousemove", (event) => {
    const map = currentMap(store.get());
    if (!map || !element._fullLayout) {
      return;
    }
    const point = dataFromPointer(element, event);
    const name = point.inside ? objectAt(map, point.x, point.y) : "";
    if (element.dataset.hoverObject !== name) {
      element.dataset.hoverObject = name;
      element.title = name ? `${name} collides here` : "";
    }
  });

  element.addEventListener("keydown", (event) => {
    const { robot, joints, mapJoints, stepDeg, stepMm } = store.get();
    const moves = { ArrowRight: [0, 1], ArrowLeft: [0, -1], ArrowUp: [1, 1], ArrowDown: [1, -1] };
    const move = moves[event.key];
    if (!robot || !move || mapJoints[move[0]] >= robot.dof) {
      return;
    }
    event.preventDefault();
    const index = mapJoints[move[0]];
    const joint = robot.joints[index];
    const step = (joint.unit === "mm" ? stepMm : stepDeg) * (event.shiftKey ? 10 : 1);
    const next = [...joints];
    next[index] = clamp(joints[index] + move[1] * step, joint.lower, joint.upper);
    actions.nudging("joints");
    actions.setJoints(next, { reason: "map" });
  });

  return { render };
}
