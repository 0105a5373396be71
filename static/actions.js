// Edits of the page state. Views call these; linking.js reacts to the
// resulting state changes by asking the server for FK or IK.

import { branchOf } from "./branches.js";

// Arrow-key nudges come in bursts. While the keys keep coming the page treats
// them as a drag (saving, joint maps and checks wait, so each key's inverse
// kinematics answers as fast as a drag's); the burst ends this long after the
// last key or the last kinematics answer, whichever is later, and the held work
// runs once. Counting from the answer matters on a busy machine: a user waits
// for a key's answer before the next key, and a burst that ended while an
// answer was slower than this started the held work (save, maps, checks) under
// the next keys, which then waited behind it.
const NUDGE_QUIET_MS = 700;
// a key whose answer never comes (a failed request) holds its burst no longer than this
const NUDGE_ANSWER_WAIT_MS = 5000;

/**
 * Actions bound to one store.
 * @param {{store: ReturnType<import("./state.js").createStore>}} options
 */
export function createActions({ store }) {
  const get = store.get;
  let nudgeTimer = null;
  let nudgeKind = null;
  let lastNudgeAt = 0;

  /** Whether the last nudge's kinematics answer is in (the target's IK, the joints' FK). */
  function nudgeAnswered({ ik, target, fkJoints, joints }) {
    if (nudgeKind === "target") {
      return Boolean(ik && ik.target === target);
    }
    return nudgeKind === "joints" ? fkJoints === joints : true;
  }

  /** A key nudge of `kind` ("target", "fixture" or "joints"): start or extend a nudge burst. */
  function nudging(kind) {
    if (nudgeTimer === null && get().dragging) {
      return; // a pointer drag is on: it ends the burst itself
    }
    if (nudgeTimer === null) {
      setDragging(true, kind);
    }
    nudgeKind = kind;
    lastNudgeAt = performance.now();
    holdNudgeBurst();
  }

  /** (Re)start the quiet time that ends a nudge burst; it ends only once the last key is answered. */
  function holdNudgeBurst() {
    clearTimeout(nudgeTimer);
    nudgeTimer = setTimeout(() => {
      if (!nudgeAnswered(get()) && performance.now() - lastNudgeAt < NUDGE_ANSWER_WAIT_MS) {
        holdNudgeBurst();
        return;
      }
      nudgeTimer = null;
      setDragging(false);
    }, NUDGE_QUIET_MS);
  }

  // an inverse or forward kinematics answer during a burst holds it from its arrival
  store.subscribe(
    () => {
      if (nudgeTimer !== null) {
        holdNudgeBurst();
      }
    },
    { keys: ["ik", "fk"] },
  );

  /** Move the target. reason "target" marks a user edit (saved into the cell); others are not saved. */
  function setTarget(target, { inputAt = performance.now(), reason = "target" } = {}) {
    store.update({ target, targetInputAt: inputAt }, { reason });
  }

  /** Move the target position by `steps` nudge steps along axis 0, 1 or 2 (x, y, z). */
  function nudgeTarget(axis, steps, { inputAt = performance.now() } = {}) {
    const { target, stepMm } = get();
    if (!target) {
      return;
    }
    const position = [...target.position_mm];
    position[axis] += steps * stepMm;
    nudging("target");
    setTarget({ ...target, position_mm: position }, { inputAt });
  }

  /** Move the selected fixture on the page ({name, position_mm, rpy_deg} in the world); reason "fixture" is saved. */
  function setFixture(fixture, { reason = "fixture" } = {}) {
    store.update({ fixture }, { reason });
  }

  /** Move the selected fixture by `steps` nudge steps along axis 0, 1 or 2 (x, y, z). */
  function nudgeFixture(axis, steps) {
    const { fixture, stepMm } = get();
    if (!fixture) {
      return;
    }
    const position = [...fixture.position_mm];
    position[axis] += steps * stepMm;
    nudging("fixture");
    setFixture({ ...fixture, position_mm: position });
  }

  function setJoints(joints, { reason = "joints" } = {}) {
    store.update({ joints }, { reason });
  }

  function setJoint(index, value) {
    const joints = [...get().joints];
    joints[index] = value;
    setJoints(joints);
  }

  /** Move the arm and/or set the branch it follows, in one update: `{joints?, selectedBranch?}`. */
  function setArm({ joints, selectedBranch }, { reason = "joints" } = {}) {
    const patch = {};
    if (joints !== undefined) {
      patch.joints = joints;
    }
    if (selectedBranch !== undefined) {
      patch.selectedBranch = selectedBranch;
    }
    store.update(patch, { reason });
  }

  /** Take an IK solution: the arm moves onto it and follows its branch from now on. */
  function selectSolution(solution) {
    setArm({ joints: [...solution.joints_deg], selectedBranch: branchOf(solution) }, { reason: "solution" });
  }

  /** Put the target on the current tool pose. */
  function targetFromTool() {
    const { fk } = get();
    if (fk) {
      setTarget({ position_mm: [...fk.position_mm], rpy_deg: [...fk.rpy_deg] });
    }
  }

  function setMapJoints(pair) {
    store.update({ mapJoints: pair });
  }

  function setMap3Joints(triple) {
    store.update({ map3Joints: triple });
  }

  /** Select a cell target, path waypoint or fixture; cellsync.js moves the target (or the page's fixture) onto it. */
  function select(selection) {
    store.update({ selection }, { reason: "select" });
  }

  function setStep({ stepMm = get().stepMm, stepDeg = get().stepDeg } = {}) {
    store.update({ stepMm, stepDeg });
  }

  function setSnap(snap) {
    store.update({ snap });
  }

  function setShowReach(showReach) {
    store.update({ showReach });
  }

  function setShowCapsules(showCapsules) {
    store.update({ showCapsules });
  }

  function setFollow(follow) {
    store.update({ follow });
  }

  /** The track's carriage dragged to `valueMm` (not saved yet), or null when no drag holds it. */
  function setCarriage(valueMm) {
    store.update({ carriage: valueMm === null ? null : { value_mm: valueMm } }, { reason: "carriage" });
  }

  /** A pointer drag started or ended; `kind` says what is dragged ("target", "fixture", "carriage" or "joints"). */
  function setDragging(dragging, kind = "target") {
    store.update({ dragging, dragKind: dragging ? kind : null });
  }

  function setStatus(level, message) {
    store.update({ status: { level, message } });
  }

  return {
    setArm,
    setCarriage,
    setTarget,
    nudgeTarget,
    setFixture,
    nudgeFixture,
    setJoints,
    setJoint,
    selectSolution,
    targetFromTool,
    setMapJoints,
    setMap3Joints,
    select,
    setStep,
    setSnap,
    setFollow,
    setShowReach,
    setShowCapsules,
    setDragging,
    nudging,
    setStatus,
  };
}
