// The page's one severity policy: how far beyond or inside a threshold a
// joint limit, a clearance or a singularity distance is, and the words for
// it. Every view and panel that colours the arm's state asks this module.
// Thresholds come from the cell file's `thresholds` (the same set the
// server's checks use, cell/thresholds.py QualityThresholds); while a cell has
// none, the documented defaults below apply.

/** Documented defaults of QualityThresholds (server/posebridge/cell/thresholds.py). */
export const DEFAULT_THRESHOLDS = Object.freeze({
  limit_margin_deg: 5.0,
  limit_margin_mm: 10.0,
  clearance_mm: 25.0,
  wrist_deg: 10.0,
  elbow_deg: 5.0,
  shoulder_mm: 50.0,
  fixture_distance_mm: 200.0,
});

export const LEVELS = Object.freeze(["ok", "warn", "bad"]);

/** The thresholds in force: the cell file's `thresholds` over the defaults. */
export function thresholdsOf(state) {
  const fromCell = state && state.cell && state.cell.cell ? state.cell.cell.thresholds : null;
  return { ...DEFAULT_THRESHOLDS, ...(fromCell || {}) };
}

/** The worse of two levels ("ok" < "warn" < "bad"). */
export function worse(a, b) {
  return LEVELS.indexOf(a) >= LEVELS.indexOf(b) ? a : b;
}

const number = (value) => Math.abs(value).toFixed(1);
const unitText = (unit) => (unit === "deg" ? "°" : " mm");

/** Level and words of one joint's signed margin (negative beyond the limit). */
export function limitItem({ joint, unit, margin, nearer_limit: side }, thresholds) {
  if (margin === null || margin === undefined) {
    return null;
  }
  const limit = unit === "mm" ? thresholds.limit_margin_mm : thresholds.limit_margin_deg;
  if (margin < 0) {
    return { level: "bad", kind: "limit", text: `${joint} ${number(margin)}${unitText(unit)} beyond its ${side} limit` };
  }
  if (margin < limit) {
    return { level: "warn", kind: "limit", text: `${joint} ${number(margin)}${unitText(unit)} from its ${side} limit` };
  }
  return null;
}

/** Level and words of one contact (signed distance, negative is the depth). */
export function contactItem({ capsule, other, distance_mm: distance }, thresholds) {
  if (distance < 0) {
    return { level: "bad", kind: "collision", text: `${capsule} ${number(distance)} mm into ${other}` };
  }
  if (distance < thresholds.clearance_mm) {
    return { level: "warn", kind: "clearance", text: `${capsule} ${number(distance)} mm from ${other}` };
  }
  return null;
}

/** Level and words of the singularity distances (wrist, elbow, shoulder). */
export function singularityItems(singularity, thresholds) {
  if (!singularity) {
    return [];
  }
  const items = [];
  if (singularity.wrist_bend_deg < thresholds.wrist_deg) {
    items.push({ level: "warn", kind: "singularity", text: `wrist ${number(singularity.wrist_bend_deg)}° from straight (wrist singularity)` });
  }
  if (singularity.elbow_deg < thresholds.elbow_deg) {
    items.push({ level: "warn", kind: "singularity", text: `elbow ${number(singularity.elbow_deg)}° from stretched or folded (elbow singularity)` });
  }
  if (singularity.shoulder_mm < thresholds.shoulder_mm) {
    items.push({ level: "warn", kind: "singularity", text: `wrist centre ${number(singularity.shoulder_mm)} mm from the first axis (shoulder singularity)` });
  }
  return items;
}

/**
 * Limit rows of a plain forward kinematics answer (the page without a cell):
 * margins from /api/fk with the side taken from the robot's limits.
 */
export function limitsFromFk(robot, fk, joints) {
  return robot.joints.map((joint, k) => {
    const margin = fk.limit_margins_deg ? fk.limit_margins_deg[k] : null;
    const middle = (joint.lower + joint.upper) / 2;
    return { joint: joint.name, unit: joint.unit, margin, nearer_limit: joints[k] >= middle ? "upper" : "lower" };
  });
}

/**
 * The arm's state in words and one level, worst first.
 * @param {{limits: object[], contacts?: object[], singularity?: object|null}} facts
 * @returns {{level: string, items: {level, kind, text}[]}}
 */
export function armSeverity(facts, thresholds) {
  const items = [
    ...(facts.limits || []).map((row) => limitItem(row, thresholds)),
    ...(facts.contacts || []).map((row) => contactItem(row, thresholds)),
    ...singularityItems(facts.singularity, thresholds),
  ].filter(Boolean);
  items.sort((a, b) => LEVELS.indexOf(b.level) - LEVELS.indexOf(a.level));
  const level = items.reduce((acc, item) => worse(acc, item.level), "ok");
  return { level, items };
}

/**
 * The severity of the arm as the page shows it now: from the cell's arm state
 * (POST /api/cell/fk) when it belongs to the current joints, else from the
 * plain forward kinematics answer (limits only).
 */
export function currentArmSeverity(state) {
  const thresholds = thresholdsOf(state);
  const { armState, robot, fk, joints } = state;
  if (armState && sameJoints(armState.joints, joints)) {
    return { ...armSeverity(armState.result, thresholds), complete: true };
  }
  if (robot && fk && state.fkJoints && sameJoints(state.fkJoints, joints)) {
    return { ...armSeverity({ limits: limitsFromFk(robot, fk, joints) }, thresholds), complete: !state.cellActive };
  }
  return { level: "ok", items: [], complete: false };
}

function sameJoints(a, b) {
  return Array.isArray(a) && Array.isArray(b) && a.length === b.length && a.every((v, k) => Math.abs(v - b[k]) < 1e-9);
}

/** The thresholds in one line, as the status area shows them. */
export function thresholdsText(thresholds) {
  return (
    `Thresholds: limits ${thresholds.limit_margin_deg}° / ${thresholds.limit_margin_mm} mm, ` +
    `clearance ${thresholds.clearance_mm} mm, wrist ${thresholds.wrist_deg}°, ` +
    `elbow ${thresholds.elbow_deg}°, shoulder ${thresholds.shoulder_mm} mm, ` +
    `target off its fixture ${thresholds.fixture_distance_mm} mm`
  );
}

/** Colour of a level from the palette (arm drawing, markers). */
export function levelColour(palette, level, normal) {
  return level === "bad" ? palette.bad : level === "warn" ? palette.warn : normal;
}
