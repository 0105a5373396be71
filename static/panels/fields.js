// Small DOM builders shared by the panels: labelled numeric fields with units.

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
