// Joint values panel: a slider and a number field per joint, in the joint's unit.

import { element, showValue } from "./fields.js";

/**
 * @param {{container: HTMLElement, store: object, actions: object}} options
 */
export function createJointsPanel({ container, store, actions }) {
  const grid = element("div", { className: "pb-joints" });
  container.append(grid);
  let rows = [];
  let builtFor = null;

  function build(robot) {
    rows = robot.joints.map((joint, index) => {
      const slider = element("input", {
        attributes: {
          type: "range",
          min: String(joint.lower),
          max: String(joint.upper),
          step: "0.1",
          id: `joint-slider-${index}`,
          "aria-label": `${joint.name} (${joint.unit})`,
        },
      });
      const number = element("input", {
        attributes: {
          type: "number",
          min: String(joint.lower),
          max: String(joint.upper),
          step: "0.1",
          id: `joint-value-${index}`,
          "aria-label": `${joint.name} value in ${joint.unit}`,
        },
      });
      slider.addEventListener("input", () => actions.setJoint(index, Number(slider.value)));
      number.addEventListener("change", () => {
        const value = Number(number.value);
        if (number.value.trim() !== "" && Number.isFinite(value)) {
          actions.setJoint(index, value);
        }
      });
      grid.append(
        element("label", { text: joint.name, attributes: { for: `joint-value-${index}` } }),
        slider,
        number,
        element("span", { className: "pb-unit", text: joint.unit }),
      );
      return { slider, number };
    });
  }

  function render() {
    const { robot, joints } = store.get();
    if (!robot) {
      return;
    }
    if (builtFor !== robot) {
      grid.replaceChildren();
      build(robot);
      builtFor = robot;
    }
    joints.forEach((value, index) => {
      if (document.activeElement !== rows[index].slider) {
        rows[index].slider.value = String(value);
      }
      showValue(rows[index].number, value, 1);
    });
  }

  store.subscribe(render, { keys: ["robot", "joints"] });
  return { render };
}
