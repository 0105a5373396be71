// Reach sections under the plan and the elevation: how many tool directions
// the robot reaches in each cell of the slice through the target (plan: the
// horizontal slice at the target's z; elevation: the vertical slice at its y).
// Computed as server jobs when switched on, after the target or the cell
// changes (debounced, never during a drag).

import { runJob } from "./api.js";

const DEBOUNCE_MS = 400;

/** Whether a section still describes the state: same cell, same slice value (to 1 mm). */
export function sectionIsCurrent(section, { cell }, value) {
  return Boolean(section && cell && section.cell_etag === cell.etag && Math.abs(section.requested_mm - value) < 1);
}

/**
 * @param {{store: object, api: object, actions: object}} options
 */
export function createReachSections({ store, api, actions }) {
  const slots = [
    { key: "reachPlan", axis: "z", coordinate: 2, running: null },
    { key: "reachElevation", axis: "y", coordinate: 1, running: null },
  ];
  let timer = null;

  async function compute(slot) {
    const state = store.get();
    const value = state.target.position_mm[slot.coordinate];
    if (sectionIsCurrent(state[slot.key], state, value)) {
      return;
    }
    if (slot.running) {
      slot.running.cancel();
    }
    const handle = runJob({ api, start: () => api.startReachSection({ axis: slot.axis, value_mm: value }) });
    slot.running = handle;
    try {
      const job = await handle.done;
      if (slot.running === handle && job.state === "done") {
        store.update({ [slot.key]: { ...job.result, requested_mm: value } });
      } else if (job.state === "failed") {
        actions.setStatus("warn", `Reach section: ${job.detail}`);
      }
    } catch (error) {
      actions.setStatus("warn", `Reach section: ${error.message}`);
    } finally {
      if (slot.running === handle) {
        slot.running = null;
      }
    }
  }

  function schedule() {
    const state = store.get();
    if (timer !== null) {
      clearTimeout(timer);
      timer = null;
    }
    if (!state.showReach || !state.cellActive || !state.target || state.dragging) {
      return;
    }
    timer = setTimeout(() => {
      timer = null;
      slots.forEach((slot) => compute(slot));
    }, DEBOUNCE_MS);
  }

  store.subscribe(schedule, { keys: ["showReach", "target", "cell", "cellActive", "dragging"] });
}
