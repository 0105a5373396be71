// The status area right above the views: where the arm is and, in words, what
// is wrong with it and by how much ("j1 6.0° beyond its upper limit",
// "gripper-body 12.0 mm into press-column-left"), with the thresholds that
// decide it. The level and the words come from severity.js, the page's one
// severity policy.

import { currentArmSeverity, thresholdsOf, thresholdsText } from "../severity.js";

const AT_TARGET_MM = 1;

/** Where the arm is: on the selected target or waypoint when its TCP is there, else its TCP position. */
export function armPlace(state) {
  const { fk, selection, selectedBranch, target } = state;
  const parts = [];
  if (fk) {
    const gap = target ? Math.hypot(...fk.position_mm.map((v, k) => v - target.position_mm[k])) : Infinity;
    if (gap <= AT_TARGET_MM && selection && selection.kind === "target") {
      parts.push(`at target ${selection.name}`);
    } else if (gap <= AT_TARGET_MM && selection && selection.kind === "waypoint") {
      parts.push(`at ${selection.path} waypoint ${selection.index + 1}`);
    } else {
      parts.push(`TCP at ${fk.position_mm.map((v) => v.toFixed(0)).join(", ")} mm`);
    }
  }
  if (selectedBranch) {
    parts.push(`branch ${selectedBranch.label}`);
  }
  return parts.join(" · ");
}

/** The arm's state in one sentence: the problems, worst first, or that it is clear. */
export function armSentence(severity) {
  if (severity.items.length === 0) {
    return severity.complete ? "within limits, clear of the cell, away from singularities" : "checking…";
  }
  return severity.items.map((item) => item.text).join("; ");
}

/** The header's one line: where the arm is and its state in a word or its worst problem. */
export function armSummary(state, severity) {
  const place = armPlace(state);
  const worst = severity.items[0];
  const word = worst ? `${worst.text}${severity.items.length > 1 ? ` (+${severity.items.length - 1} more)` : ""}` : severity.complete ? "clear" : "";
  return [place, word].filter(Boolean).join(" — ");
}

/** @param {{element: HTMLElement, summary: HTMLElement, store: object}} options */
export function createArmStatus({ element, summary, store }) {
  const text = element.querySelector("#arm-state-text");
  const thresholds = element.querySelector("#arm-state-thresholds");

  function render() {
    const state = store.get();
    if (!state.robot) {
      return;
    }
    const severity = currentArmSeverity(state);
    element.dataset.level = severity.level;
    element.dataset.complete = String(severity.complete);
    text.textContent = armSentence(severity);
    thresholds.textContent = thresholdsText(thresholdsOf(state));
    summary.textContent = armSummary(state, severity);
    summary.dataset.level = severity.level;
    summary.title = summary.textContent;
  }

  store.subscribe(render, { keys: ["robot", "fk", "fkJoints", "joints", "armState", "cell", "cellActive", "selection", "selectedBranch", "target"] });
  return { render };
}
