// Colours for plots, read from the CSS custom properties in style.css (the
// page's palette, with its citation; the review report uses the same colours
// from posebridge.palette, and a test keeps the two equal).

const NAMES = [
  "branch-1", "branch-2", "branch-3", "branch-4", "branch-5", "branch-6", "branch-7", "branch-8",
  "branch-singular", "axis-x", "axis-y", "axis-z", "robot", "robot-edge", "fixture", "fixture-edge",
  "target", "tool",
  "limit-box", "ok", "warn", "bad", "ink", "ink-muted", "rule",
  "region-1", "region-2", "region-3", "region-4", "region-5", "region-6", "region-7", "region-8",
  "region-9", "region-10", "region-11", "region-12",
];

const REGION_COUNT = 12;

/**
 * Fill colour of the `index`-th object a joint map shows (objects in the cell's
 * order, cycling after twelve): every object in one map gets its own colour.
 */
export function regionColour(palette, index) {
  return palette[`region-${(Math.max(0, index) % REGION_COUNT) + 1}`];
}

/** CSS `rgba(...)` text of a `#rrggbb` colour with opacity `alpha` (0..1). */
export function withAlpha(colour, alpha) {
  const [red, green, blue] = [1, 3, 5].map((k) => parseInt(colour.slice(k, k + 2), 16));
  return `rgba(${red}, ${green}, ${blue}, ${alpha})`;
}

/** Map of palette names (without the "--pb-" prefix) to colour strings. */
export function readPalette({ element = document.documentElement } = {}) {
  const style = getComputedStyle(element);
  return Object.fromEntries(NAMES.map((name) => [name, style.getPropertyValue(`--pb-${name}`).trim()]));
}

const SYMBOLS = ["circle", "square", "diamond", "triangle-up", "triangle-down", "pentagon", "hexagon", "star"];
const GLYPHS = ["●", "■", "◆", "▲", "▼", "⬟", "⬢", "★"];

/**
 * Marker style of an IK solution's arm branch: colour, plotly symbol and a text
 * glyph of the same shape. The (shoulder, elbow, wrist) signs pick one of eight
 * styles; a branch with an undefined sign (singular) gets a grey open marker.
 */
export function branchStyle(palette, { shoulder, elbow, wrist }) {
  if (shoulder === 0 && elbow === 0 && wrist === 0) {
    return { color: palette["branch-1"], symbol: SYMBOLS[0], glyph: GLYPHS[0], key: "none" };
  }
  const signs = [shoulder, elbow, wrist];
  if (signs.some((s) => s === 0) && !(shoulder === 0 && wrist === 0)) {
    return { color: palette["branch-singular"], symbol: "circle-x", glyph: "⊗", key: "singular" };
  }
  const index = (shoulder < 0 ? 4 : 0) + (elbow < 0 ? 2 : 0) + (wrist < 0 ? 1 : 0);
  return {
    color: palette[`branch-${index + 1}`],
    symbol: SYMBOLS[index],
    glyph: GLYPHS[index],
    key: `b${index}`,
  };
}
