// Small DOM builders shared by the panels: labelled numeric fields with units,
// rows chosen by click or keyboard.

import { formatNumber } from "../units.js";

/** Create an element with attributes and children. */
export function element(tag, { className = "", text = "", attributes = {} } = {}, children = []) {
  const node = document.createElement(tag);
  if (className) {
    node.className = className;
  }
  if (text) {
    node.textContent = text;
  }
  for (const [name, value] of Object.entries(attributes)) {
    node.setAttribute(name, value);
  }
  node.append(...children);
  return node;
}

/** Run `choose()` when `node` is clicked, or focused and Enter or Space is pressed. */
export function onChoose(node, choose) {
  node.addEventListener("click", choose);
  node.addEventListener("keydown", (event) => {
    if (event.key === "Enter" || event.key === " ") {
      event.preventDefault();
      choose();
    }
  });
}

/**
 * A labelled number input with its unit. `onCommit(value)` runs on change
 * (Enter or leaving the field) with a finite number.
 */
export function numberField({ name, unit, id, step = "any", onCommit }) {
  const input = element("input", {
    attributes: { type: "number", id, step: String(step), inputmode: "decimal" },
  });
  input.addEventListener("change", () => {
    const value = Number(input.value);
    if (input.value.trim() !== "" && Number.isFinite(value)) {
      onCommit(value);
    }
  });
  const label = element("label", { className: "pb-field", attributes: { for: id } }, [
    element("span", { className: "pb-name", text: name }),
    input,
    element("span", { className: "pb-unit", text: unit }),
  ]);
  return { label, input };
}

/** Show a value in an input unless the user is typing in it. */
export function showValue(input, value, decimals = 1) {
  if (document.activeElement !== input) {
    input.value = Number.isFinite(value) ? formatNumber(value, { decimals }) : "";
  }
}
