// Units and number formatting at the page boundary: millimetres and degrees,
// with the unit written beside every number shown.

const LENGTH_UNIT = "mm";

/** Fixed-decimal text of a number, "–" when missing or not finite. */
export function formatNumber(value, { decimals = 1 } = {}) {
  if (value === null || value === undefined || !Number.isFinite(value)) {
    return "–";
  }
  const text = value.toFixed(decimals);
  // avoid "-0.0"
  return Number(text) === 0 ? (0).toFixed(decimals) : text;
}

/** "123.4 mm" */
export function formatLength(valueMm, { decimals = 1 } = {}) {
  return `${formatNumber(valueMm, { decimals })} ${LENGTH_UNIT}`;
}

/** A joint value with its own unit ("deg" for revolute, "mm" for prismatic). */
export function formatJoint(value, unit, { decimals = 1 } = {}) {
  return `${formatNumber(value, { decimals })} ${unit}`;
}

/** Round to the nearest multiple of step (no change when step is not positive). */
export function snapToStep(value, step) {
  if (!(step > 0)) {
    return value;
  }
  return Math.round(value / step) * step;
}

/** Clamp into [lower, upper]. */
export function clamp(value, lower, upper) {
  return Math.min(upper, Math.max(lower, value));
}
