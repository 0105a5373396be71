// The joint map: a plane through joint space over two chosen joints, with the
// joint-limit box, the current configuration and a marker for every inverse
// kinematics solution of the target, styled by arm branch. Clicking or
// dragging sets the two joints; clicking a marker takes that solution.

import { attachDrag, draw, layout2d, pointerFromData } from "./plotting.js";
import { frameScheduler } from "./frame.js";
import { branchHeading } from "../branches.js";
import { branchStyle } from "../palette.js";
import { clamp, formatJoint } from "../units.js";

const PICK_RADIUS_PX = 12;

/** Branch words without the turn counts (turn variants share a legend entry). */
export function branchWords(branch) {
  return branch
    .split(", ")
    .filter((part) => !/ [+-]\d+ turns?$/.test(part))
    .join(", ");
}

function solutionValues(ik, index) {
  return ik ? ik.result.solutions.map((solution) => solution.joints_deg[index]) : [];
}

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

/**
 * @param {{element: HTMLElement, note: HTMLElement, legend: HTMLElement, header: HTMLElement,
 *          store: object, actions: object, palette: object}} options
 *   header: where the joint pair selectors go; note: the slice explanation;
 *   legend: the branch legend (HTML, so that it costs no plot redraw).
 */
export function createJointMapView({ element, note, legend, header, store, actions, palette }) {
  let lastRenderedIk = null;
  let legendKey = null;
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

  function updateSelectors({ robot, mapJoints }) {
    selectors.forEach((select, slot) => {
      const names = robot.joints.map((joint) => joint.name).join(",");
      if (select.dataset.names !== names) {
        select.replaceChildren(
          ...robot.joints.map((joint, index) => new Option(`${joint.name} (${joint.unit})`, String(index))),
        );
        select.dataset.names = names;
      }
      select.value = String(mapJoints[slot]);
    });
  }

  function solutionGroups(ik) {
    const groups = new Map();
    ik.result.solutions.forEach((solution, index) => {
      const style = branchStyle(palette, solution);
      const words = branchWords(solution.branch) || "single branch";
      const key = `${style.key}|${words}`;
      if (!groups.has(key)) {
        groups.set(key, { style, words, points: [] });
      }
      groups.get(key).points.push({ solution, index });
    });
    return [...groups.values()];
  }

  function solutionTraces({ ik, mapJoints, selectedBranch, joints }, groups) {
    const [a, b] = mapJoints;
    const traces = groups.map(({ style, words, points }) => ({
      type: "scatter",
      mode: "markers",
      name: words,
      legendgroup: words,
      x: points.map((p) => p.solution.joints_deg[a]),
      y: points.map((p) => p.solution.joints_deg[b]),
      customdata: points.map((p) => p.index),
      marker: {
        size: 14,
        color: style.color,
        symbol: points.map((p) => (p.solution.within_limits ? style.symbol : `${style.symbol}-open`)),
        line: { color: "#ffffff", width: 1 },
      },
      meta: { role: "ik-solutions" },
    }));
    const selected = ik.result.solutions.find(
      (s) => selectedBranch !== null && s.branch === selectedBranch.label && s.joints_deg.every((value, k) => Math.abs(value - joints[k]) < 1e-6),
    );
    if (selected) {
      traces.push({
        type: "scatter",
        mode: "markers",
        name: "selected solution",
        x: [selected.joints_deg[a]],
        y: [selected.joints_deg[b]],
        marker: { size: 24, symbol: "circle-open", color: palette.ink, line: { width: 2 } },
        showlegend: false,
        hoverinfo: "skip",
      });
    }
    return traces;
  }

  function render() {
    const state = store.get();
    const { robot, joints, ik, mapJoints } = state;
    if (!robot || joints.length !== robot.dof) {
      return;
    }
    updateSelectors(state);
    const [a, b] = mapJoints;
    const [ja, jb] = [robot.joints[a], robot.joints[b]];
    const data = [];
    const groups = ik ? solutionGroups(ik) : [];
    if (groups.length > 0) {
      data.push(...solutionTraces(state, groups));
    }
    renderLegend(groups, ik ? ik.result.solutions : []);
    data.push({
      type: "scatter",
      mode: "markers",
      name: "current configuration",
      x: [joints[a]],
      y: [joints[b]],
      marker: { size: 16, symbol: "cross-thin-open", color: palette.ink, line: { width: 2.5 } },
      showlegend: false,
    });
    const layout = layout2d({
      xTitle: axisTitle(ja),
      yTitle: axisTitle(jb),
      xRange: paddedRange(ja, solutionValues(ik, a)),
      yRange: paddedRange(jb, solutionValues(ik, b)),
      palette,
    });
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
        fillcolor: "rgba(0, 114, 178, 0.04)",
        layer: "below",
      },
      {
        type: "line",
        xref: "x",
        yref: "paper",
        x0: joints[a],
        x1: joints[a],
        y0: 0,
        y1: 1,
        line: { color: palette.ink, width: 0.6, dash: "dot" },
        layer: "below",
      },
      {
        type: "line",
        xref: "paper",
        yref: "y",
        x0: 0,
        x1: 1,
        y0: joints[b],
        y1: joints[b],
        line: { color: palette.ink, width: 0.6, dash: "dot" },
        layer: "below",
      },
    ];
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
    draw(element, data, layout);
    note.textContent = sliceNote(state);
    if (ik && ik !== lastRenderedIk) {
      lastRenderedIk = ik;
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
    }
  }

  function renderLegend(groups, solutions) {
    const heading = groups.length ? `${branchHeading(solutions)}:` : "No solution for the target";
    const key = heading + groups.map((group) => `${group.style.key}|${group.words}`).join(";");
    if (key === legendKey) {
      return;
    }
    legendKey = key;
    const entries = groups.map(({ style, words }) => {
      const glyph = document.createElement("span");
      glyph.className = "pb-swatch";
      glyph.textContent = style.glyph;
      glyph.style.color = style.color;
      const entry = document.createElement("span");
      entry.append(glyph, ` ${words}`);
      return entry;
    });
    const title = document.createElement("span");
    title.className = "pb-legend-title";
    title.textContent = heading;
    const current = document.createElement("span");
    current.textContent = "✛ current configuration";
    legend.replaceChildren(title, ...entries, current);
  }

  function sliceNote({ robot, joints, mapJoints }) {
    const others = robot.joints
      .map((joint, index) => ({ joint, index }))
      .filter(({ index }) => !mapJoints.includes(index))
      .map(({ joint, index }) => `${joint.name} ${formatJoint(joints[index], joint.unit)}`);
    const held = others.length ? ` with ${others.join(", ")} held` : "";
    return (
      `A slice through the current configuration${held}. ` +
      "Solution markers sit at each solution's own values of the two mapped joints; " +
      "their other joints differ from the slice. Open markers are outside the joint limits."
    );
  }

  const requestRender = frameScheduler({ render });
  store.subscribe(requestRender, { keys: ["robot", "joints", "ik", "mapJoints", "selectedBranch"] });

  function pickSolution(event) {
    const { ik, mapJoints } = store.get();
    if (!ik) {
      return null;
    }
    const [a, b] = mapJoints;
    let best = null;
    let bestDistance = PICK_RADIUS_PX;
    for (const solution of ik.result.solutions) {
      const p = pointerFromData(element, solution.joints_deg[a], solution.joints_deg[b]);
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
    next[a] = clamp(point.x, robot.joints[a].lower, robot.joints[a].upper);
    next[b] = clamp(point.y, robot.joints[b].lower, robot.joints[b].upper);
    actions.setJoints(next, { reason: "map" });
  }

  attachDrag({
    figure: element,
    onDragging: (active) => actions.setDragging(active),
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

  element.addEventListener("keydown", (event) => {
    const { robot, joints, mapJoints, stepDeg, stepMm } = store.get();
    const moves = { ArrowRight: [0, 1], ArrowLeft: [0, -1], ArrowUp: [1, 1], ArrowDown: [1, -1] };
    const move = moves[event.key];
    if (!robot || !move) {
      return;
    }
    event.preventDefault();
    const index = mapJoints[move[0]];
    const joint = robot.joints[index];
    const step = (joint.unit === "mm" ? stepMm : stepDeg) * (event.shiftKey ? 10 : 1);
    const next = [...joints];
    next[index] = clamp(joints[index] + move[1] * step, joint.lower, joint.upper);
    actions.setJoints(next, { reason: "map" });
  });

  return { render };
}
