// Current tool pose panel: forward kinematics of the joint values.

import { element } from "./fields.js";
import { formatNumber } from "../units.js";

const NAMES = ["x", "y", "z", "roll", "pitch", "yaw"];

/**
 * @param {{container: HTMLElement, store: object}} options
 */
export function createToolPanel({ container, store }) {
  const cells = NAMES.map((name) => element("output", { attributes: { id: `tool-${name}` } }));
  const quality = element("output", { attributes: { id: "tool-manipulability" } });
  quality.title =
    "Yoshikawa manipulability of the TCP's translational Jacobian (m, rad); 0 at a singularity";
  const fields = NAMES.map((name, index) =>
    element("div", { className: "pb-field pb-readout" }, [
      element("span", { className: "pb-name", text: name }),
      cells[index],
      element("span", { className: "pb-unit", text: index < 3 ? "mm" : "deg" }),
    ]),
  );
  container.append(
    element("div", { className: "pb-fields" }, fields),
    element("div", { className: "pb-controls" }, [
      element("span", { className: "pb-name", text: "Manipulability " }),
      quality,
    ]),
  );

  function render() {
    const { fk } = store.get();
    if (!fk) {
      return;
    }
    [...fk.position_mm, ...fk.rpy_deg].forEach((value, index) => {
      cells[index].textContent = formatNumber(value, { decimals: index < 3 ? 1 : 2 });
    });
    quality.textContent = formatNumber(fk.manipulability, { decimals: 4 });
  }

  store.subscribe(render, { keys: ["fk"] });
  return { render };
}
