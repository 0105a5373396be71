// Asks the server for the arm's state in the cell (limits, contacts with depth,
// singularity distances: POST /api/cell/fk) whenever the shown joint values
// change, through one latest-only channel: a drag sends at most one request
// per interval and stale answers are dropped, so the page never floods the
// server. The answer goes into the store as `armState`.

import { createLatestChannel, isRateLimited, retryDelayMs } from "./api.js";

// every frame at rest; every 250 ms while something is dragged, so the drag's own
// inverse and forward kinematics answers never queue behind it; below the
// reviewer's rate cap on a shared page
const WHILE_DRAGGING_MS = 250;
const REVIEW_MS = 200;

/** @param {{store: object, api: object}} options */
export function createArmState({ store, api }) {
  let retry = null;
  const channel = createLatestChannel({
    minIntervalMs: () => {
      const { readOnly, dragging } = store.get();
      return readOnly ? REVIEW_MS : dragging ? WHILE_DRAGGING_MS : 16;
    },
    send: (payload, options) => api.armState(payload, options),
    onResult: (result, meta, payload) => {
      store.update({ armState: { joints: payload.joints_deg, etag: meta.etag, result } }, { reason: "arm-state" });
    },
    onError: (error) => {
      if (isRateLimited(error) && retry === null) {
        retry = setTimeout(() => {
          retry = null;
          ask(store.get());
        }, retryDelayMs(error));
      }
      // other failures (a robot switch mid-request) leave the last state; FK still draws the arm
    },
  });

  function ask(state) {
    const { cellActive, cell, robot, joints } = state;
    if (!cellActive || !cell || !robot || joints.length !== robot.dof) {
      return;
    }
    channel.request({ joints_deg: [...joints] }, { etag: cell.etag });
  }

  store.subscribe(ask, { keys: ["joints", "cell", "cellActive"] });
  store.subscribe(
    (state) => {
      if (!state.cellActive) {
        channel.cancel();
        store.update({ armState: null });
      }
    },
    { keys: ["cellActive", "robot"] },
  );
  return { ask };
}
