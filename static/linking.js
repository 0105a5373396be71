// Links the two halves: joint edits ask the server for forward kinematics,
// target edits ask for inverse kinematics, and the arm follows the target on
// the selected branch. Requests go through latest-only channels (api.js), so
// a drag sends at most one request per frame and stale answers are dropped.
// While the page shows the cell, requests carry the cell's robot base and
// tool, so every pose is a world pose.

import { createLatestChannel, isRateLimited, retryDelayMs } from "./api.js";
import { branchOf, chooseFollowed } from "./branches.js";
import { kinematicsPacing } from "./pacing.js";

/**
 * The status line after an inverse kinematics answer: empty while a solution
 * within limits exists (the header's arm summary says where the arm is and in
 * what state), else why the target cannot be reached or held.
 */
function ikSummary(result) {
  const total = result.solutions.length;
  const within = result.solutions.filter((s) => s.within_limits).length;
  if (total === 0) {
    return { level: "warn", message: `Target not reachable: ${result.reason || "no solution"}` };
  }
  const ignored = result.ignored_components.length
    ? `not controlled: ${result.ignored_components.join(", ")}`
    : "";
  if (within === 0) {
    return { level: "warn", message: `No solution of the target is within the joint limits${ignored ? `; ${ignored}` : ""}` };
  }
  return { level: "info", message: ignored };
}

/**
 * Wire the store to the server.
 * @param {{store: object, actions: object, api: object}} options
 * @returns {{loadRobot: (spec: string) => Promise<void>}}
 */
/**
 * A point carried by the track's carriage (the robot base), moved from the cell's track
 * value to the page's dragged carriage value along the rail; as it is without either.
 */
export function carriedPosition(state, position) {
  const track = (state.cell?.scene?.external_axes || []).find((axis) => axis.kind === "track");
  if (!track || !state.carriage) {
    return position;
  }
  const shift = state.carriage.value_mm - track.value;
  return position.map((p, k) => p + shift * track.direction[k]);
}

/** The cell's base pose and tool for kinematics requests, when the page shows the cell. */
export function cellFrames(state) {
  if (!state.cellActive || !state.cell) {
    return {};
  }
  const { base, tool } = state.cell.scene;
  return {
    base: { position_mm: carriedPosition(state, base.position_mm), rpy_deg: base.rpy_deg },
    tool: { position_mm: tool.position_mm, rpy_deg: tool.rpy_deg },
  };
}

const FK_WHILE_DRAGGING_MS = 120;

// A reviewer's page (readOnly) asks less often, below the server's cap on a
// reviewer's kinematics requests as the server states it (pacing.js).
function fkIntervalMs({ dragKind, readOnly, reviewerCaps }) {
  if (readOnly) {
    const { fkMs, fkDraggingMs } = kinematicsPacing(reviewerCaps);
    return dragKind === "target" ? fkDraggingMs : fkMs;
  }
  return dragKind === "target" ? FK_WHILE_DRAGGING_MS : 16;
}

function ikIntervalMs({ readOnly, reviewerCaps }) {
  return readOnly ? kinematicsPacing(reviewerCaps).ikMs : 16;
}

export function createLinking({ store, actions, api }) {
  let targetFromNextFk = false;
  const retryTimers = { fk: null, ik: null };

  /**
   * A request refused with 429 (a reviewer over the server's rate cap): say so
   * calmly and ask again for the page's current state after the Retry-After.
   * Any other error goes to the status line.
   */
  function onRequestError(kind, askAgain) {
    return (error) => {
      if (!isRateLimited(error)) {
        actions.setStatus("error", error.message);
        return;
      }
      actions.setStatus("info", "Waiting for the server (a shared review asks it at a limited rate)…");
      if (retryTimers[kind] === null) {
        retryTimers[kind] = setTimeout(() => {
          retryTimers[kind] = null;
          askAgain(store.get());
        }, retryDelayMs(error));
      }
    };
  }

  // while a target is dragged, forward kinematics (the arm's drawing, margins) is
  // asked for at most every FK_WHILE_DRAGGING_MS: the inverse kinematics answers
  // the drag waits for then do not queue behind it
  const fkChannel = createLatestChannel({
    minIntervalMs: () => fkIntervalMs(store.get()),
    send: (payload, options) => api.fk(payload, options),
    onResult: (result, meta, payload) => {
      const fk = { ...result.configurations[0], capsules: result.capsules, frameNames: result.frame_names };
      store.update({ fk, fkJoints: payload.joints_deg }, { reason: "fk" });
      if (targetFromNextFk) {
        targetFromNextFk = false;
        actions.targetFromTool();
      }
    },
    onError: onRequestError("fk", (state) => askFk(state)),
  });

  const ikChannel = createLatestChannel({
    minIntervalMs: () => ikIntervalMs(store.get()),
    send: (payload, options) => api.ik(payload, options),
    onResult: (result, meta, payload) => {
      const state = store.get();
      const ik = { result, target: payload.pose, inputAt: meta.inputAt };
      const summary = ikSummary(result);
      // the answer and the arm following it go into the store in one update, so
      // the views redraw once per answer
      const patch = { ik };
      if (state.follow && result.solutions.length > 0) {
        const { solution, note } = chooseFollowed({
          solutions: result.solutions,
          branch: state.selectedBranch,
          joints: state.joints,
        });
        if (solution) {
          patch.joints = [...solution.joints_deg];
          patch.selectedBranch = branchOf(solution);
        }
        if (note) {
          summary.level = "warn";
          summary.message = summary.message ? `${note}; ${summary.message}` : note;
        }
      }
      store.update(patch, { reason: "ik" });
      actions.setStatus(summary.level, summary.message);
    },
    onError: onRequestError("ik", (state) => askIk(state, state.targetInputAt)),
  });

  /** Ask for forward kinematics of the current joint values. */
  function askFk(state) {
    if (state.robot && state.joints.length === state.robot.dof) {
      fkChannel.request({ robot: state.robot.robot, joints_deg: state.joints, ...cellFrames(state) });
    }
  }

  /** Ask for inverse kinematics of the current target. */
  function askIk(state, inputAt) {
    if (state.robot && state.target) {
      const payload = { robot: state.robot.robot, pose: state.target, seed_deg: state.joints, ...cellFrames(state) };
      ikChannel.request(payload, { inputAt });
    }
  }

  store.subscribe(askFk, { keys: ["joints", "carriage"] });
  store.subscribe((state) => askIk(state, state.targetInputAt), { keys: ["target"] });

  /**
   * Load a robot. With `cellActive` the page shows the cell (its robot, base
   * and tool) and `onLoaded` runs once the model is in the store (cellsync
   * selects a target there); otherwise the robot stands alone at the world
   * origin and the target starts on its home tool pose.
   */
  // a new cell version may move the base or change the tool: ask again for both
  store.subscribe(
    (state) => {
      if (!state.cellActive || !state.robot || state.joints.length !== state.robot.dof) {
        return;
      }
      askFk(state);
      askIk(state, performance.now());
    },
    { keys: ["cell"] },
  );

  async function loadRobot(spec, { cellActive = false, onLoaded = null } = {}) {
    fkChannel.cancel();
    ikChannel.cancel();
    actions.setStatus("info", `Loading ${spec}…`);
    try {
      const [robot, drawing] = await Promise.all([api.robotModel(spec), api.robotMeshes(spec)]);
      targetFromNextFk = onLoaded === null;
      const mapJoints = robot.dof >= 3 ? [1, 2] : [0, Math.min(1, robot.dof - 1)];
      const map3Joints = robot.dof >= 3 ? [0, 1, 2] : null;
      store.update(
        {
          robot,
          cellActive,
          fk: null,
          fkJoints: null,
          ik: null,
          target: null,
          selectedBranch: null,
          mapJoints,
          map3Joints,
          jointMap: null,
          jointMap3: null,
          pathCurve: null,
          joints: [...robot.home_joints],
          robotMeshes: drawing.meshes,
        },
        { reason: "robot" },
      );
      if (robot.robot_geometry_missing) {
        actions.setStatus("error", robot.robot_geometry_missing);
      } else {
        actions.setStatus("info", `${robot.name}: ${robot.description}`);
      }
      if (onLoaded) {
        onLoaded();
      }
    } catch (error) {
      actions.setStatus("error", error.message);
    }
  }

  return { loadRobot };
}
