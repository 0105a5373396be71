// Limit margin bars: where each joint sits in its range and how far it is from
// the nearer limit, in the joint's unit; then the cell's external axes (track in
// mm, turntables in deg) at the values the cell is drawn at.

import { element } from "./fields.js";
import { formatJoint } from "../units.js";
import { limitItem, thresholdsOf } from "../severity.js";

/** "ok", "warn" or "bad" for a signed margin, by the page's one severity policy (severity.js). */
export function marginLevel(margin, unit, thresholds) {
  const item = limitItem({ joint: "", unit, margin, nearer_limit: "" }, thresholds);
  return item ? item.level : "ok";
}

/**
 * @param {{container: HTMLElement, store: object}} options
 */
export function createMarginsPanel({ container, store }) {
  const grid = element("div", { className: "pb-margins", attributes: { id: "margin-bars" } });
  container.append(grid);

  function render() {
    const { robot, fk } = store.get();
    if (!robot || !fk) {
      return;
    }
    const values = store.get().fkJoints;
    const thresholds = thresholdsOf(store.get());
    const external = (store.get().cell?.scene?.external_axes || []).map((axis) => ({
      name: axis.name,
      unit: axis.unit,
      lower: axis.lower,
      upper: axis.upper,
      value: axis.value,
      margin: Math.min(axis.value - axis.lower, axis.upper - axis.value),
      external: true,
    }));
    const rows = [
      ...robot.joints.map((joint, index) => ({ ...joint, value: values[index], margin: fk.limit_margins_deg[index] })),
      ...external,
    ];
    grid.replaceChildren(
      ...rows.flatMap((joint) => {
        const span = joint.upper - joint.lower;
        const { margin, value } = joint;
        const level = marginLevel(margin, joint.unit, thresholds);
        const position = Math.min(1, Math.max(0, (value - joint.lower) / span));
        const track = element("div", {
          className: "pb-track",
          attributes: {
            role: "meter",
            "aria-label": `${joint.name} position in its range`,
            "aria-valuemin": String(joint.lower),
            "aria-valuemax": String(joint.upper),
            "aria-valuenow": String(value),
          },
        });
        // the filled part spans from the nearer limit to the joint value
        const fill = element("div", { className: "pb-fill", attributes: { "data-level": level } });
        const nearLower = value - joint.lower <= joint.upper - value;
        fill.style.left = nearLower ? "0%" : `${100 * position}%`;
        fill.style.width = nearLower ? `${100 * position}%` : `${100 * (1 - position)}%`;
        const tick = element("div", { className: "pb-tick" });
        tick.style.left = `calc(${100 * position}% - 1px)`;
        track.append(fill, tick);
        const text =
          margin === null ? "no limit" : `${formatJoint(margin, joint.unit)}${margin < 0 ? " beyond" : ""}`;
        return [
          element("span", { text: joint.name, attributes: joint.external ? { "data-external": "true" } : {} }),
          track,
          element("span", { className: "pb-margin-text", text, attributes: { "data-level": level } }),
        ];
      }),
    );
  }

  store.subscribe(render, { keys: ["robot", "fk", "cell"] });
  return { render };
}
