// Joint-space obstacle maps of the cell: the two-joint map under the joint map
// view and the three-joint map of the 3D joint-space view. A map is a slice
// through the current configuration, so it is computed again (as a server job,
// debounced) when the mapped joints, the held joints or the cell change. No
// map is started while a drag is in progress; the newest request replaces an
// older one still running (which is cancelled).
//
// On a reviewer's page (readOnly) the server caps job starts, so maps wait
// longer after a change and starts go through the page's job pacer
// (pacing.js). A start the server still refuses (429) waits its Retry-After
// and is tried once more; meanwhile, and if refused again, the map's job
// state says it is waiting, calmly, instead of reporting an error.

import { isRateLimited, runJob } from "./api.js";

const DEBOUNCE_MS = 350;
const REVIEW_DEBOUNCE_MS = 1500;
const POLL_MS = 150;
const REVIEW_POLL_MS = 400;
const HOLD_TOLERANCE = 0.05; // deg or mm: held joints closer than this count as unchanged
export const RESOLUTION_2 = 96;
export const RESOLUTION_3 = 24;

/** Whether a map still describes the state: same cell, same joints, same held values. */
export function mapIsCurrent(map, { cell, joints }, chosen) {
  if (!map || !cell || map.cell_etag !== cell.etag) {
    return false;
  }
  if (map.joints.length !== chosen.length || map.joints.some((j, k) => j !== chosen[k])) {
    return false;
  }
  return joints.every((value, index) => chosen.includes(index) || Math.abs(value - map.hold_deg[index]) <= HOLD_TOLERANCE);
}

/**
 * @param {{store: object, api: object, actions: object, pacer: {delayMs: Function, take: Function}}} options
 *   pacer: paces the starts of a reviewer's page (pacing.js); not used for the owner.
 * @returns {{cancel: (slot: "2d" | "3d") => void}}
 */
export function createMaps({ store, api, actions, pacer }) {
  const slots = {
    "2d": { name: "Joint map", mapKey: "jointMap", jobKey: "jointMapJob", chosen: (s) => s.mapJoints, resolution: RESOLUTION_2, picture: true, timer: null, running: null, runningKey: null, retryAt: 0 },
    "3d": { name: "3D joint map", mapKey: "jointMap3", jobKey: "jointMap3Job", chosen: (s) => s.map3Joints, resolution: RESOLUTION_3, picture: false, timer: null, running: null, runningKey: null, retryAt: 0 },
  };

  function wanted(slot, state) {
    const chosen = slot.chosen(state);
    return (
      state.cellActive && state.robot && chosen && state.joints.length === state.robot.dof &&
      !mapIsCurrent(state[slot.mapKey], state, chosen)
    );
  }

  function waiting(slot, detail) {
    store.update({ [slot.jobKey]: { state: "waiting", done: 0, total: 0, detail } });
  }

  async function compute(slot) {
    slot.timer = null;
    const state = store.get();
    if (state.dragging || !wanted(slot, state)) {
      return;
    }
    const refusedForMs = slot.retryAt - Date.now();
    if (refusedForMs > 0) {
      // a 429's Retry-After holds for every start of this map: the start waiting for it is
      // dropped (its joints are out of date) and this one starts when the wait is over
      if (slot.running) {
        slot.running.cancel();
        slot.running = null;
      }
      waiting(slot, `Waiting ${Math.ceil(refusedForMs / 1000)} s: the server is busy with other jobs`);
      slot.timer = setTimeout(() => compute(slot), refusedForMs);
      return;
    }
    const body = { joints: [...slot.chosen(state)], hold_deg: [...state.joints], resolution: slot.resolution };
    const key = JSON.stringify(body);
    if (slot.running && slot.runningKey === key) {
      return; // this very map is on its way (its job, or its picture after the job)
    }
    if (state.readOnly) {
      const delay = pacer.delayMs();
      if (delay > 0) {
        waiting(slot, `Waiting ${Math.ceil(delay / 1000)} s: a shared review starts few jobs at a time`);
        slot.timer = setTimeout(() => compute(slot), delay);
        return;
      }
      pacer.take();
    }
    if (slot.running) {
      slot.running.cancel();
    }
    const handle = runJob({
      api,
      start: () => api.startJointMap(body),
      pollMs: state.readOnly ? REVIEW_POLL_MS : POLL_MS,
      onWait: ({ seconds }) => {
        slot.retryAt = Date.now() + seconds * 1000;
        if (slot.running === handle) {
          waiting(slot, `Waiting ${Math.ceil(seconds)} s: the server is busy with other jobs`);
        }
      },
      onProgress: (job) => {
        if (slot.running === handle) {
          store.update({ [slot.jobKey]: { state: job.state, done: job.done, total: job.total, detail: job.detail } });
        }
      },
    });
    slot.running = handle;
    slot.runningKey = key;
    try {
      const job = await handle.done;
      // a two-joint map is drawn from the server's picture of it (views/jointmap.js)
      const picture = job.state === "done" && slot.picture ? await api.jobPicture(job.id) : null;
      if (slot.running !== handle) {
        return;
      }
      slot.running = null;
      if (job.state === "done") {
        store.update({ [slot.mapKey]: picture ? { ...job.result, picture } : job.result, [slot.jobKey]: null });
      } else if (job.state === "failed") {
        store.update({ [slot.jobKey]: { state: "failed", done: 0, total: 0, detail: job.detail } });
        actions.setStatus("error", `${slot.name}: ${job.detail}`);
      }
    } catch (error) {
      if (slot.running !== handle) {
        return;
      }
      slot.running = null;
      if (isRateLimited(error)) {
        waiting(slot, "The server is busy: the map is computed again after the next change");
        actions.setStatus("info", `${slot.name}: the server is busy; computed again after the next change`);
      } else {
        store.update({ [slot.jobKey]: { state: "failed", done: 0, total: 0, detail: error.message } });
        actions.setStatus("warn", `${slot.name}: ${error.message}`);
      }
    }
  }

  function schedule(slot) {
    if (slot.timer !== null) {
      clearTimeout(slot.timer);
    }
    const delay = store.get().readOnly ? REVIEW_DEBOUNCE_MS : DEBOUNCE_MS;
    slot.timer = setTimeout(() => compute(slot), delay);
  }

  store.subscribe(
    (state) => {
      for (const slot of Object.values(slots)) {
        if (wanted(slot, state)) {
          schedule(slot);
        }
      }
    },
    { keys: ["joints", "mapJoints", "map3Joints", "cell", "cellActive", "dragging"] },
  );

  function cancel(name) {
    const slot = slots[name];
    if (slot.running) {
      slot.running.cancel();
      slot.running = null;
    }
    if (slot.timer !== null) {
      clearTimeout(slot.timer);
      slot.timer = null;
    }
    store.update({ [slot.jobKey]: { state: "cancelled", done: 0, total: 0, detail: "" } });
  }

  return { cancel };
}
