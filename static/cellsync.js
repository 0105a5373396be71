// The cell on the page: loads it from the server, turns the selected target or
// waypoint into the page's target pose (and a selected fixture into the page's
// fixture pose), and saves moves back into the cell: a cell target, a waypoint
// given as a pose, a fixture. A move is saved when the drag ends (or
// SAVE_DELAY_MS after the last typed or keyed change), with the content
// version it was made from; moves of several items are saved one after the
// other. If the cell was changed elsewhere meanwhile the server refuses (412),
// the page reloads the cell and says the move was not saved. If the save itself
// fails (disk full, read-only file or folder: the server names the file), the
// message is shown and the move is kept: "Save again" (or the next move) sends
// it again, from the same cell version.
//
// On a reviewer's page (readOnly in the store) nothing is sent: a target can
// still be moved on the page to look at its IK answers, but the move stays
// local, and the status line says once that changes are not saved. A fixture
// is not moved at all (its targets would not follow without a save).

import { ApiError } from "./api.js";
import { branchFromRequirement } from "./branches.js";
import { movedItem, selectedFixture, selectedTarget, selectedWaypoint, shownTarget } from "./selection.js";

const SAVE_DELAY_MS = 400;
export const REVIEW_NOT_SAVED = "review mode: changes are not saved";
const REVIEW_SAVE_STATE = Object.freeze({ state: "review", message: "moved on this page only (review)" });

function poseOf(drawing) {
  return { position_mm: [...drawing.position_mm], rpy_deg: [...drawing.rpy_deg] };
}

function samePose(a, b) {
  return [...a.position_mm, ...a.rpy_deg].every((value, k) => Math.abs(value - [...b.position_mm, ...b.rpy_deg][k]) <= 1e-6);
}

/**
 * @param {{store: object, actions: object, api: object, linking: object}} options
 * @returns {{loadCell: (answer?: Promise<object>) => Promise<void>, reloadCell: () => Promise<void>, moveBase: (edit: object) => Promise<void>, moveRail: (rail: object) => Promise<void>,
 *            moveTable: (table: {name: string, position_mm: number[]}) => Promise<void>,
 *            retrySave: () => void, chooseChain: (links: object) => Promise<void>,
 *            chooseChainEnd: (toLink: string) => Promise<void>}}
 */
export function createCellSync({ store, actions, api, linking }) {
  let saveTimer = null;
  // moves not yet sent, one per cell item: key -> {label, send(etag) -> Promise<cell document>}
  const pending = new Map();
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
      return poseOf(target);
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
    const fixture = selectedFixture(state);
    actions.setFixture(fixture ? { name: fixture.name, ...poseOf(fixture) } : null, { reason: "select" });
    const target = selectedTarget(state);
    const waypoint = selectedWaypoint(state);
    if (waypoint && waypoint.joints_deg) {
      actions.setArm({ joints: [...waypoint.joints_deg], selectedBranch: null }, { reason: "select" });
    } else if (target && target.branch) {
      actions.setArm({ selectedBranch: branchFromRequirement(target) }, { reason: "select" });
    }
    const pose = poseOfSelection(state);
    if (pose) {
      actions.setTarget(pose, { reason: "select-target" });
    }
  }

  async function save() {
    saveTimer = null;
    if (saving || pending.size === 0) {
      return;
    }
    if (store.get().readOnly) {
      pending.clear();
      notSaved();
      return;
    }
    const [key, { label, send }] = pending.entries().next().value;
    pending.delete(key);
    saving = true;
    const { cell } = store.get();
    store.update({ cellSave: { state: "saving", message: `Saving ${label}…` } });
    let failed = false;
    try {
      const document = await send(cell.etag);
      store.update({ cell: document, cellSave: { state: "saved", message: `Saved ${label}` } });
    } catch (error) {
      if (error instanceof ApiError && error.status === 412) {
        pending.clear();
        store.update({ cellSave: { state: "conflict", message: "Changed elsewhere: reloaded, move not saved" } });
        actions.setStatus("warn", `The cell was changed in another page or program; it was reloaded and the move of ${label} was not saved.`);
        await reloadCell();
      } else {
        // keep the edit to send again, unless a newer move of the same item is waiting
        failed = true;
        if (!pending.has(key)) {
          pending.set(key, { label, send });
        }
        store.update({ cellSave: { state: "error", message: `Not saved: ${error.message}`, retry: true } });
        actions.setStatus("error", `Saving ${label} failed, the move is kept on this page: ${error.message}`);
      }
    } finally {
      saving = false;
      if (pending.size > 0 && !failed) {
        scheduleSave();
      }
    }
  }

  /** Send the kept moves again after a failed save (the cell panel's "Save again"). */
  function retrySave() {
    if (pending.size > 0) {
      scheduleSave();
    }
  }

  /** Keep the latest move of one cell item until it is saved; `send(etag)` saves it. */
  function queue(key, label, send) {
    pending.set(key, { label, send });
    const { readOnly } = store.get();
    store.update({ cellSave: readOnly ? REVIEW_SAVE_STATE : { state: "unsaved", message: `${label} moved` } });
    scheduleSave();
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

  // a user edit of the target (drag, keys, typed values) moves the selected cell
  // target or pose waypoint
  store.subscribe(
    (state, { reason }) => {
      if (reason !== "target" || !state.cellActive) {
        return;
      }
      const item = movedItem(state);
      if (!item) {
        return;
      }
      const pose = { position_mm: [...state.target.position_mm], rpy_deg: [...state.target.rpy_deg] };
      if (item.kind === "target") {
        queue(`target ${item.name}`, item.name, (etag) => api.moveTarget(item.name, pose, etag));
      } else {
        queue(`waypoint ${item.path} ${item.index}`, `${item.path} waypoint ${item.index + 1}`, (etag) =>
          api.moveWaypoint(item.path, item.index, pose, etag),
        );
      }
    },
    { keys: ["target"] },
  );

  // a user edit of the selected fixture (drag, keys, typed values), given in the
  // world: its targets move with it once saved
  store.subscribe(
    (state, { reason }) => {
      const drawn = selectedFixture(state);
      if (reason !== "fixture" || !state.cellActive || !state.fixture || !drawn || drawn.name !== state.fixture.name) {
        return;
      }
      if (state.readOnly) {
        notSaved();
        actions.setFixture({ name: drawn.name, ...poseOf(drawn) }, { reason: "select" });
        return;
      }
      const { name, position_mm: position, rpy_deg: rpy } = state.fixture;
      // the orientation is sent only when it changed, so a move keeps the stored one exactly
      const turned = rpy.some((value, k) => Math.abs(value - drawn.rpy_deg[k]) > 1e-9);
      const edit = { position_mm: [...position], frame: "world", ...(turned ? { rpy_deg: [...rpy] } : {}) };
      queue(`fixture ${name}`, name, (etag) => api.moveFixture(name, edit, etag));
    },
    { keys: ["fixture"] },
  );

  store.subscribe(
    (state) => {
      if (!state.dragging && pending.size > 0) {
        scheduleSave();
      }
    },
    { keys: ["dragging"] },
  );

  store.subscribe(applySelection, { keys: ["selection"] });

  // a new cell version may have moved the shown target (its fixture moved) or the
  // selected fixture: the page follows (and asks IK for the moved target)
  store.subscribe(
    (state) => {
      if (!state.cellActive || pending.size > 0 || state.dragging) {
        return;
      }
      const target = shownTarget(state);
      if (target && state.target && !samePose(target, state.target)) {
        actions.setTarget(poseOf(target), { reason: "select-target" });
      }
      const fixture = selectedFixture(state);
      if (fixture && state.fixture && !samePose(fixture, state.fixture)) {
        actions.setFixture({ name: fixture.name, ...poseOf(fixture) }, { reason: "select" });
      }
    },
    { keys: ["cell"] },
  );

  async function reloadCell() {
    const document = await api.readCell();
    store.update({ cell: document });
    applySelection();
  }

  /** Load the cell (`answer`: its GET /api/cell answer when already asked for) and its robot. */
  async function loadCell(answer = api.readCell()) {
    let document;
    try {
      document = await answer;
    } catch (error) {
      await offerChainChoice(error);
      throw error;
    }
    store.update({ cell: document, chainChoice: null });
    const first = document.scene.targets[0];
    const onLoaded = first ? () => actions.select({ kind: "target", name: first.name }) : null;
    actions.select(null);
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

  /**
   * Put the track's rail where a rail placement candidate has it (origin, direction); the
   * server widens the travel to cover both the configured one and the one its targets need
   * (`travel_needed_mm`, left out when the candidate reaches none). Saved at once, nothing is
   * sent on a reviewer's page.
   */
  async function moveRail(rail) {
    const { cell, readOnly } = store.get();
    if (readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return;
    }
    if (!cell || !cell.cell.track) {
      return;
    }
    const edit = { origin_mm: [...rail.origin_mm], direction: [...rail.direction] };
    if (rail.travel_needed_mm) {
      edit.travel_needed_mm = [...rail.travel_needed_mm];
    }
    try {
      const document = await api.moveTrack(edit, cell.etag);
      store.update({ cell: document, cellSave: { state: "saved", message: "Saved the rail" } });
    } catch (error) {
      actions.setStatus("error", `Moving the rail: ${error.message}`);
      await reloadCell();
    }
  }

  /**
   * Move the turntable called `table.name` to `table.position_mm` (a table placement
   * candidate): the server moves what it carries by the same step, as the search did (its
   * fixtures, their children and targets; a fixture whose parent stays by the step in that
   * parent's frame); saved at once, nothing is sent on a reviewer's page.
   */
  async function moveTable(table) {
    const { cell, readOnly } = store.get();
    if (readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return;
    }
    const tables = cell && cell.cell.turntables ? cell.cell.turntables : [];
    if (!tables.some((t) => t.name === table.name)) {
      return;
    }
    try {
      const document = await api.moveTurntable(table.name, { position_mm: [...table.position_mm] }, cell.etag);
      store.update({ cell: document, cellSave: { state: "saved", message: `Saved the position of ${table.name}` } });
    } catch (error) {
      actions.setStatus("error", `Moving the table: ${error.message}`);
      await reloadCell();
    }
  }

  /**
   * The track's carriage dragged to `valueMm`: saved as the track's home_mm (the value the
   * cell is shown at), then the page's carriage follows the saved cell; nothing is sent on a
   * reviewer's page.
   */
  async function moveCarriage(valueMm) {
    const { cell, readOnly } = store.get();
    if (readOnly || !cell || !cell.cell.track) {
      actions.setCarriage(null);
      return;
    }
    try {
      const document = await api.moveTrack({ home_mm: valueMm }, cell.etag);
      store.update({ cell: document, carriage: null, cellSave: { state: "saved", message: "Saved the track position" } });
    } catch (error) {
      actions.setStatus("error", `Moving the track: ${error.message}`);
      actions.setCarriage(null);
      await reloadCell();
    }
  }

  /**
   * Choose where a URDF robot's chain starts or ends (the cell's robot.from_link / to_link, given
   * as `{ from_link }` or `{ to_link }`): saved with If-Match, then the robot reloads.
   */
  async function chooseChain(links) {
    const { cell, readOnly } = store.get();
    if (readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return;
    }
    try {
      await api.replaceCell({ ...cell.cell, robot: { ...cell.cell.robot, ...links } }, cell.etag);
      await loadCell();
    } catch (error) {
      actions.setStatus("error", `Choosing the robot chain: ${error.message}`);
      await reloadCell();
    }
  }

  /** After a refused cell: if its URDF robot only needs its chain end chosen, offer the leaves. */
  async function offerChainChoice(error) {
    if (!(error instanceof ApiError) || error.status !== 422 || store.get().readOnly) {
      return;
    }
    try {
      store.update({ chainChoice: await api.readChainChoice() });
    } catch {
      store.update({ chainChoice: null }); // refused for another reason: the status says why
    }
  }

  /** Save the chosen chain end of a robot that could not load (If-Match), then load the cell. */
  async function chooseChainEnd(toLink) {
    const { chainChoice } = store.get();
    try {
      await api.chooseChainEnd(toLink, chainChoice.etag);
      await loadCell();
      actions.setStatus("info", `The robot's chain now ends at ${toLink}`);
    } catch (error) {
      actions.setStatus("error", `Choosing the chain end: ${error.message}`);
    }
  }

  /** Give waypoints of a path as joint values (the fastest sequence's edits), If-Match like every edit. */
  async function setWaypointJoints(path, edits, etag) {
    if (store.get().readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return false;
    }
    try {
      const document = await api.setWaypointJoints(path, edits, etag);
      store.update({ cell: document, cellSave: { state: "saved", message: `Saved the sequence of ${path}` } });
      return true;
    } catch (error) {
      if (error instanceof ApiError && error.status === 412) {
        actions.setStatus("warn", "The cell was changed elsewhere; it was reloaded and the sequence was not used.");
        await reloadCell();
      } else {
        actions.setStatus("error", `Using the sequence: ${error.message}`);
      }
      return false;
    }
  }

  /** A cell document the server answered after a change made elsewhere on the page (a mesh upload). */
  function showSavedCell(document, message) {
    store.update({ cell: document, cellSave: { state: "saved", message } });
  }

  return { loadCell, reloadCell, moveBase, moveRail, moveTable, moveCarriage, retrySave, chooseChain, chooseChainEnd, setWaypointJoints, showSavedCell };
}
