// The cell on the page: loads it from the server, turns the selected target or
// waypoint into the page's target pose, and saves target moves back into the
// cell. A move is saved when the drag ends (or SAVE_DELAY_MS after the last
// typed or keyed change), with the content version it was made from; if the
// cell was changed elsewhere meanwhile the server refuses (412), the page
// reloads the cell and says the move was not saved.
//
// On a reviewer's page (readOnly in the store) nothing is sent: a target can
// still be moved on the page to look at its IK answers, but the move stays
// local, and the status line says once that changes are not saved.

import { ApiError } from "./api.js";

const SAVE_DELAY_MS = 400;
export const REVIEW_NOT_SAVED = "review mode: changes are not saved";
const REVIEW_SAVE_STATE = Object.freeze({ state: "review", message: "moved on this page only (review)" });
const SIGNS = { front: 1, back: -1, up: 1, down: -1, positive: 1, negative: -1 };

/** A required branch of a target as the page's branch record (0 = either). */
export function branchFromRequirement(branch) {
  if (!branch) {
    return null;
  }
  const words = ["shoulder", "elbow", "wrist"].filter((part) => branch[part]).map((part) => branch[part]);
  return {
    label: words.join(", "),
    shoulder: branch.shoulder ? SIGNS[branch.shoulder] : 0,
    elbow: branch.elbow ? SIGNS[branch.elbow] : 0,
    wrist: branch.wrist ? SIGNS[branch.wrist] : 0,
  };
}

/** The drawing of the selected target, or null. */
export function selectedTarget({ cell, selection }) {
  if (!cell || !selection) {
    return null;
  }
  let name = selection.kind === "target" ? selection.name : null;
  if (selection.kind === "waypoint") {
    const waypoint = cell.scene.paths.find((p) => p.name === selection.path)?.waypoints[selection.index];
    name = waypoint && waypoint.source === "target" && !waypoint.approach ? waypoint.target : null;
  }
  return cell.scene.targets.find((target) => target.name === name) || null;
}

/** The selected waypoint's drawing, or null. */
export function selectedWaypoint({ cell, selection }) {
  if (!cell || !selection || selection.kind !== "waypoint") {
    return null;
  }
  return cell.scene.paths.find((p) => p.name === selection.path)?.waypoints[selection.index] || null;
}

/**
 * @param {{store: object, actions: object, api: object, linking: object}} options
 * @returns {{loadCell: () => Promise<void>, reloadCell: () => Promise<void>, moveBase: (edit: object) => Promise<void>}}
 */
export function createCellSync({ store, actions, api, linking }) {
  let saveTimer = null;
  let pending = null;
  let saving = false;
  let toldNotSaved = false;

  /** A reviewer's edit: nothing is sent; the cell panel and (once) the status line say so. */
  function notSaved() {
    store.update({ cellSave: REVIEW_SAVE_STATE });
    if (!toldNotSaved) {
      toldNotSaved = true;
      actions.setStatus("info", REVIEW_NOT_SAVED);
    }
  }

  function poseOfSelection(state) {
    const target = selectedTarget(state);
    if (target) {
      return { position_mm: [...target.position_mm], rpy_deg: [...target.rpy_deg] };
    }
    const waypoint = selectedWaypoint(state);
    if (waypoint) {
      const position = waypoint.approach
        ? state.cell.scene.targets.find((t) => t.name === waypoint.target).approach_position_mm
        : waypoint.position_mm;
      return { position_mm: [...position], rpy_deg: [...waypoint.rpy_deg] };
    }
    return null;
  }

  function applySelection() {
    const state = store.get();
    if (!state.cellActive) {
      return;
    }
    const target = selectedTarget(state);
    const waypoint = selectedWaypoint(state);
    if (waypoint && waypoint.joints_deg) {
      store.update({ joints: [...waypoint.joints_deg], selectedBranch: null }, { reason: "select" });
    } else if (target && target.branch) {
      store.update({ selectedBranch: branchFromRequirement(target.branch) }, { reason: "select" });
    }
    const pose = poseOfSelection(state);
    if (pose) {
      actions.setTarget(pose, { reason: "select-target" });
    }
  }

  async function save() {
    saveTimer = null;
    if (saving || pending === null) {
      return;
    }
    if (store.get().readOnly) {
      pending = null;
      notSaved();
      return;
    }
    const { name, pose } = pending;
    pending = null;
    saving = true;
    const { cell } = store.get();
    store.update({ cellSave: { state: "saving", message: `Saving ${name}…` } });
    try {
      const document = await api.moveTarget(name, pose, cell.etag);
      store.update({ cell: document, cellSave: { state: "saved", message: `Saved ${name}` } });
    } catch (error) {
      if (error instanceof ApiError && error.status === 412) {
        pending = null;
        store.update({ cellSave: { state: "conflict", message: "Changed elsewhere: reloaded, move not saved" } });
        actions.setStatus("warn", `The cell was changed in another page or program; it was reloaded and the move of ${name} was not saved.`);
        await reloadCell();
      } else {
        store.update({ cellSave: { state: "error", message: error.message } });
        actions.setStatus("error", `Saving ${name}: ${error.message}`);
      }
    } finally {
      saving = false;
      if (pending !== null) {
        scheduleSave();
      }
    }
  }

  function scheduleSave() {
    if (saveTimer !== null) {
      clearTimeout(saveTimer);
    }
    saveTimer = null;
    if (store.get().dragging) {
      return; // saved when the drag ends
    }
    saveTimer = setTimeout(save, SAVE_DELAY_MS);
  }

  // a user edit of the target (drag, keys, typed values) moves the selected cell target
  store.subscribe(
    (state, { reason }) => {
      if (reason !== "target" || !state.cellActive) {
        return;
      }
      const target = selectedTarget(state);
      if (!target) {
        return;
      }
      pending = { name: target.name, pose: { position_mm: state.target.position_mm, rpy_deg: state.target.rpy_deg } };
      store.update({ cellSave: state.readOnly ? REVIEW_SAVE_STATE : { state: "unsaved", message: `${target.name} moved` } });
      scheduleSave();
    },
    { keys: ["target"] },
  );

  store.subscribe(
    (state) => {
      if (!state.dragging && pending !== null) {
        scheduleSave();
      }
    },
    { keys: ["dragging"] },
  );

  store.subscribe(applySelection, { keys: ["selection"] });

  // a new cell version may have moved the selected target (its fixture moved): follow it
  store.subscribe(
    (state) => {
      const target = selectedTarget(state);
      if (!state.cellActive || !target || !state.target || pending !== null || state.dragging) {
        return;
      }
      const moved = [...target.position_mm, ...target.rpy_deg].some(
        (value, k) => Math.abs(value - [...state.target.position_mm, ...state.target.rpy_deg][k]) > 1e-6,
      );
      if (moved) {
        actions.setTarget({ position_mm: [...target.position_mm], rpy_deg: [...target.rpy_deg] }, { reason: "select-target" });
      }
    },
    { keys: ["cell"] },
  );

  async function reloadCell() {
    const document = await api.readCell();
    store.update({ cell: document });
    applySelection();
  }

  async function loadCell() {
    const document = await api.readCell();
    store.update({ cell: document });
    const first = document.scene.targets[0];
    const onLoaded = first ? () => actions.select({ kind: "target", name: first.name }) : null;
    store.update({ selection: null });
    await linking.loadRobot(document.robot, { cellActive: true, onLoaded });
  }

  /** Move the robot's base (placement): saved into the cell at once; nothing is sent on a reviewer's page. */
  async function moveBase(edit) {
    const { cell, readOnly } = store.get();
    if (readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return;
    }
    try {
      const document = await api.moveBase(edit, cell.etag);
      store.update({ cell: document, cellSave: { state: "saved", message: "Saved the base" } });
    } catch (error) {
      if (error instanceof ApiError && error.status === 412) {
        actions.setStatus("warn", "The cell was changed elsewhere; it was reloaded and the base was not moved.");
        await reloadCell();
      } else {
        actions.setStatus("error", `Moving the base: ${error.message}`);
      }
    }
  }

  return { loadCell, reloadCell, moveBase };
}
