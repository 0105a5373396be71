// Reach sections under the plan and the elevation: how many tool directions
// the robot reaches in each cell of the slice through the target (plan: the
// horizontal slice at the target's z; elevation: the vertical slice at its y).
// Computed as server jobs when switched on, after the target or the cell
// changes (debounced, never during a drag). On a reviewer's page (readOnly)
// they wait longer and go through the page's job pacer (pacing.js); a start
// the server refuses (429) waits its Retry-After and is tried once more, and
// the status line says so calmly.

import { isRateLimited, runJob } from "./api.js";

const DEBOUNCE_MS = 400;
const REVIEW_DEBOUNCE_MS = 2000;
const POLL_MS = 150;
const REVIEW_POLL_MS = 400;

/** Whether a section still describes the state: same cell, same slice value (to 1 mm). */
export function sectionIsCurrent(section, { cell }, value) {
  return Boolean(section && cell && section.cell_etag === cell.etag && Math.abs(section.requested_mm - value) < 1);
}

/**
 * @param {{store: object, api: object, actions: object, pacer: {delayMs: Function, take: Function}}} options
 *   pacer: paces the starts of a reviewer's page (pacing.js); not used for the owner.
 */
export function createReachSections({ store, api, actions, pacer }) {
  const slots = [
    { key: "reachPlan", axis: "z", coordinate: 2, running: null },
    { key: "reachElevation", axis: "y", coordinate: 1, running: null },
  ];
  let timer = null;

  /** Start the section of `slot`; false when a reviewer's page must wait for the pacer. */
  function compute(slot) {
    const state = store.get();
    const value = state.target.position_mm[slot.coordinate];
    if (sectionIsCurrent(state[slot.key], state, value)) {
      return true;
    }
    if (state.readOnly) {
      if (pacer.delayMs() > 0) {
        return false;
      }
      pacer.take();
    }
    if (slot.running) {
      slot.running.cancel();
    }
    const handle = runJob({
      api,
      start: () => api.startReachSection({ axis: slot.axis, value_mm: value }),
      pollMs: state.readOnly ? REVIEW_POLL_MS : POLL_MS,
      onWait: ({ seconds }) => actions.setStatus("info", `Reach section: waiting ${Math.ceil(seconds)} s for the server`),
    });
    slot.running = handle;
    finish(slot, handle, value);
    return true;
  }

  async function finish(slot, handle, value) {
    try {
      const job = await handle.done;
      // drawn from the server's picture of the section (views/projection.js)
      const picture = slot.running === handle && job.state === "done" ? await api.jobPicture(job.id) : null;
      if (slot.running === handle && job.state === "done") {
        store.update({ [slot.key]: { ...job.result, requested_mm: value, picture } });
      } else if (job.state === "failed") {
        actions.setStatus("warn", `Reach section: ${job.detail}`);
      }
    } catch (error) {
      if (isRateLimited(error)) {
        actions.setStatus("info", "Reach section: the server is busy; shown after the next change");
      } else {
        actions.setStatus("warn", `Reach section: ${error.message}`);
      }
    } finally {
      if (slot.running === handle) {
        slot.running = null;
      }
    }
  }

  function run() {
    timer = null;
    const waiting = slots.filter((slot) => !compute(slot));
    if (waiting.length > 0) {
      const delay = pacer.delayMs();
      actions.setStatus("info", `Reach section: waiting ${Math.ceil(delay / 1000)} s (a shared review starts few jobs at a time)`);
      timer = setTimeout(run, Math.max(delay, 100));
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
    timer = setTimeout(run, state.readOnly ? REVIEW_DEBOUNCE_MS : DEBOUNCE_MS);
  }

  store.subscribe(schedule, { keys: ["showReach", "target", "cell", "cellActive", "dragging"] });
}
