// The 3D joint-space view, twin of the Cartesian 3D view: three chosen joints
// as axes (deg, or mm for prismatic joints), the obstacle region as the
// centres of colliding cells of a three-joint map (one colour per obstacle),
// the joint-limit box as a wire box, the inverse kinematics solutions of the
// target by branch, the current configuration, and the selected path's
// configurations joined in order.

/* global Plotly */

import { sequenceKey, sequenceTraces } from "../sequencecurve.js";
import { axis3d, draw, layout3d } from "./plotting.js";
import { frameScheduler, kinematicsSettled } from "./frame.js";
import { branchStyle, regionColour } from "../palette.js";
import { axesExist, mapAxes, mapValues, solutionValue } from "../mapaxes.js";


/** Wire box edges over the limit box of three joints, as one polyline with null breaks. */
export function wireBox(lower, upper) {
  const corner = (bits) => bits.map((bit, k) => (bit ? upper[k] : lower[k]));
  const edges = [];
  for (let a = 0; a < 8; a += 1) {
    for (let k = 0; k < 3; k += 1) {
      const b = a | (1 << k);
      if (b !== a) {
        edges.push([a, b]);
      }
    }
  }
  const xs = [];
  const ys = [];
  const zs = [];
  for (const [a, b] of edges) {
    const p = corner([a & 1, (a >> 1) & 1, (a >> 2) & 1]);
    const q = corner([b & 1, (b >> 1) & 1, (b >> 2) & 1]);
    xs.push(p[0], q[0], null);
    ys.push(p[1], q[1], null);
    zs.push(p[2], q[2], null);
  }
  return { x: xs, y: ys, z: zs };
}

/** Occupied cell centres of a three-joint map, grouped by obstacle: [{name, x, y, z}]. */
export function voxelGroups(map) {
  const [na, nb, nc] = map.shape;
  const [xa, xb, xc] = map.axes_deg;
  const groups = new Map();
  map.obstacle.forEach((k, flat) => {
    if (k < 0) {
      return;
    }
    if (!groups.has(k)) {
      groups.set(k, { index: k, name: map.obstacle_names[k], x: [], y: [], z: [] });
    }
    const group = groups.get(k);
    const ic = flat % nc;
    const ib = Math.floor(flat / nc) % nb;
    const ia = Math.floor(flat / (nb * nc)) % na;
    group.x.push(xa[ia]);
    group.y.push(xb[ib]);
    group.z.push(xc[ic]);
  });
  // the k-th object shown (cell order) takes region colour k, as on the joint map
  return [...groups.values()].sort((a, b) => a.index - b.index).map((group, rank) => ({ ...group, rank }));
}

/**
 * @param {{element: HTMLElement, header: HTMLElement, note: HTMLElement, store: object,
 *          actions: object, palette: object, after?: Promise<void>}} options
 *   after: this view is first drawn one display frame after it resolves (the Cartesian 3D
 *   view's first arm: both are WebGL figures, the costliest drawings of a page load, and the
 *   arm is what the user waits for)
 */
export function createJointSpaceView({ element, header, note, legend, store, actions, palette, after = Promise.resolve() }) {
  let baseKey = null;
  let waiting = true;
  let dynamicStart = 0;
  const selectors = [0, 1, 2].map((slot) => {
    const label = document.createElement("label");
    label.className = "pb-hint";
    label.textContent = `${"xyz"[slot]} `;
    const select = document.createElement("select");
    select.setAttribute("aria-label", `Joint on the ${"xyz"[slot]} axis of the 3D joint view`);
    select.addEventListener("change", () => {
      const triple = [...store.get().map3Joints];
      const value = Number(select.value);
      const clash = triple.indexOf(value);
      if (clash >= 0 && clash !== slot) {
        triple[clash] = triple[slot];
      }
      triple[slot] = value;
      actions.setMap3Joints(triple);
    });
    label.append(select);
    header.append(label);
    return select;
  });

  function currentMap({ jointMap3, map3Joints, cellActive }) {
    if (!cellActive || !jointMap3 || jointMap3.joints.some((j, k) => j !== map3Joints[k])) {
      return null;
    }
    return jointMap3;
  }

  function dynamicTraces(state) {
    const { ik, map3Joints, pathCurve } = state;
    const joints = mapValues(state);
    const [a, b, c] = map3Joints;
    const solutions = ik ? ik.result.solutions : [];
    const styles = solutions.map((solution) => branchStyle(palette, solution));
    const points = pathCurve ? pathCurve.points : [];
    return [
      {
        type: "scatter3d",
        mode: "lines+markers",
        name: "path",
        x: points.map((q) => q[a]),
        y: points.map((q) => q[b]),
        z: points.map((q) => q[c]),
        line: { color: palette["ink-muted"], width: 4 },
        marker: { size: 2.5, color: palette["ink-muted"] },
        hoverinfo: "skip",
      },
      {
        type: "scatter3d",
        mode: "markers",
        name: "solutions",
        x: solutions.map((s) => solutionValue(s, a, joints)),
        y: solutions.map((s) => solutionValue(s, b, joints)),
        z: solutions.map((s) => solutionValue(s, c, joints)),
        text: solutions.map((s) => s.branch || "single branch"),
        marker: { size: 6, color: styles.map((style) => style.color), symbol: solutions.map((s) => (s.within_limits ? "diamond" : "diamond-open")) },
        hovertemplate: "%{text}<extra></extra>",
        meta: { role: "ik-solutions" },
      },
      {
        type: "scatter3d",
        mode: "markers",
        name: "current configuration",
        x: [joints[a]],
        y: [joints[b]],
        z: [joints[c]],
        marker: { size: 5, color: palette.ink, symbol: "cross" },
        hoverinfo: "skip",
      },
    ];
  }

  function render() {
    if (waiting) {
      return; // drawn when `after` has resolved
    }
    const state = store.get();
    const { robot, joints, map3Joints } = state;
    if (!robot || !map3Joints || joints.length !== robot.dof) {
      element.hidden = !map3Joints;
      return;
    }
    const axes = mapAxes(state);
    if (!axesExist(axes, map3Joints)) {
      // the mapped external axis left with the cell: back to the robot's first joints
      actions.setMap3Joints(robot.dof >= 3 ? [0, 1, 2] : null);
      return;
    }
    selectors.forEach((select, slot) => {
      const names = axes.map((joint) => joint.name).join(",");
      if (select.dataset.names !== names) {
        select.replaceChildren(...axes.map((joint, index) => new Option(`${joint.name} (${joint.unit})`, String(index))));
        select.dataset.names = names;
      }
      select.value = String(map3Joints[slot]);
    });
    const map = currentMap(state);
    const dynamic = dynamicTraces(state);
    const key = `${robot.robot}|${map3Joints.join(",")}|${map ? `${map.cell_etag}|${map.hold_deg.join(",")}` : "none"}|${sequenceKey(state.sequence)}`;
    if (key === baseKey && element.data) {
      const update = { x: dynamic.map((t) => t.x), y: dynamic.map((t) => t.y), z: dynamic.map((t) => t.z) };
      update["marker.color"] = dynamic.map((t, k) => (k === 1 ? t.marker.color : undefined));
      update["marker.symbol"] = dynamic.map((t, k) => (k === 1 ? t.marker.symbol : undefined));
      update.text = dynamic.map((t, k) => (k === 1 ? t.text : undefined));
      Plotly.restyle(element, update, dynamic.map((_, k) => dynamicStart + k));
      return;
    }
    baseKey = key;
    const chosen = map3Joints.map((index) => axes[index]);
    const box = wireBox(chosen.map((j) => j.lower), chosen.map((j) => j.upper));
    const data = [
      { type: "scatter3d", mode: "lines", name: "joint limits", ...box, line: { color: palette["limit-box"], width: 3 }, hoverinfo: "skip" },
    ];
    const groups = map ? voxelGroups(map) : [];
    renderLegend(groups);
    if (map) {
      for (const group of groups) {
        data.push({
          type: "scatter3d",
          mode: "markers",
          name: group.name,
          x: group.x,
          y: group.y,
          z: group.z,
          marker: { size: 2, color: regionColour(palette, group.rank), symbol: "square" },
          hovertemplate: `${group.name}<extra></extra>`,
          meta: { role: "obstacle", obstacle: group.name },
        });
      }
    }
    data.push(...sequenceTraces(state.sequence, map3Joints, palette));
    dynamicStart = data.length;
    data.push(...dynamic);
    const axis = (joint) =>
      axis3d(`${joint.name} (${joint.unit})`, [
        joint.lower - 0.04 * (joint.upper - joint.lower),
        joint.upper + 0.04 * (joint.upper - joint.lower),
      ]);
    draw(
      element,
      data,
      layout3d({
        axes: chosen.map(axis),
        camera: { eye: { x: 1.5, y: -1.5, z: 0.9 } },
        revision: `${robot.robot}|${map3Joints.join(",")}`,
      }),
    );
    const others = axes.filter((_, index) => !map3Joints.includes(index)).map((joint) => joint.name);
    note.textContent = map
      ? `Points are colliding cells of a ${map.shape.join(" × ")} grid (self collision not shown), a slice with ${others.join(", ")} held at the current values.`
      : state.cellActive
        ? computingText(state)
        : "Obstacle regions are shown for the cell's robot.";
  }

  /** The 3D view's own legend: one swatch per object shown, in its region colour. */
  function renderLegend(groups) {
    if (!legend) {
      return;
    }
    legend.replaceChildren(
      ...groups.map((group) => {
        const entry = document.createElement("span");
        entry.className = "pb-legend-entry";
        const swatch = document.createElement("span");
        swatch.textContent = "■";
        swatch.style.color = regionColour(palette, group.rank);
        entry.append(swatch, ` ${group.name}`);
        return entry;
      }),
    );
  }

  /** What the note says while the map is missing: being computed, or waiting for the server. */
  function computingText(state) {
    const job = state.jointMap3Job;
    return job && job.state === "waiting" ? job.detail : "The obstacle region is being computed.";
  }

  // the waiting text changes the note alone: the figure is not drawn again for it
  store.subscribe(
    (state) => {
      if (state.cellActive && state.map3Joints && !currentMap(state)) {
        note.textContent = computingText(state);
      }
    },
    { keys: ["jointMap3Job"] },
  );

  // like the Cartesian 3D view, not redrawn during a drag; once when it ends
  const requestRender = frameScheduler({
    render,
    hold: () => store.get().dragging || !kinematicsSettled(store.get()),
  });
  // a frame later: the drawing that `after` waited for is on the screen before this one starts
  after.then(() =>
    requestAnimationFrame(() => {
      waiting = false;
      requestRender();
    }),
  );
  store.subscribe(requestRender, {
    keys: ["robot", "joints", "fk", "ik", "map3Joints", "jointMap3", "pathCurve", "cellActive", "dragging", "sequence", "cell", "carriage"],
  });
  return { render };
}
