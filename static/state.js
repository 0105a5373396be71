// The single store of the page: the cell, the robot, the current joint
// values, the target pose (the selected target or waypoint), the latest
// kinematics answers, the joint-space maps and the view choices. Views read it
// and subscribe; edits go through actions.js.

/**
 * State fields:
 *   robots          library entries from /api/robots
 *   robot           robot model from /api/robots/model (joints, limits, units, bounds)
 *   joints          current joint values, boundary units (deg, mm)
 *   fk              forward kinematics of `joints` (one FkConfiguration) or null
 *   fkJoints        the joint values `fk` belongs to
 *   armState        {joints, result} of the cell's arm state (POST /api/cell/fk: limits, contacts,
 *                   singularity) for the joint values `joints`, or null; severity.js words it
 *   target          {position_mm: [x, y, z], rpy_deg: [r, p, y]} or null
 *   targetInputAt   performance.now() of the input event that last moved the target
 *   ik              {result, target, inputAt} of the latest inverse kinematics answer, or null
 *   selectedBranch  {label, shoulder, elbow, wrist} of the branch the arm follows, or null
 *   follow          the arm follows the target on the selected branch
 *   dragging        a pointer drag is in progress in a 2D view
 *   dragKind        what is dragged: "target", "fixture" or "carriage" (plan, elevation) or "joints"
 *                   (joint map), or null
 *   carriage        {value_mm}: the track's carriage as dragged on the page (the arm rides on it; saved
 *                   as the track's home_mm when the drag ends), or null: the cell's value
 *   mapJoints       [i, j]: indices into the cell's joint vector (robot joints, then external axes, mapaxes.js) on the joint map's horizontal and vertical axes
 *   stepMm          nudge step and snapping grid for positions, mm
 *   stepDeg         nudge step for angles, deg
 *   snap            snap dragged positions to the step grid
 *   status          {level: "info" | "warn" | "error", message}
 *   readOnly        a reviewer's page of a shared dashboard (review.js): nothing is saved into the cell
 *   reviewerCaps    the server's rate caps on a reviewer's requests (review.js, from the access
 *                   answer's reviewer_caps: {kind: {per_second, burst}}), or null; pacing.js
 *   cell            the server's cell (GET /api/cell answer: etag, robot, cell, scene) or null
 *   meshes          triangles of the cell's mesh fixtures by fixture name (meshes.js):
 *                   {mesh_version, full, flat}: GET /api/cell/meshes answers for the 3D view
 *                   (page budget) and for the plan and elevation (a small budget)
 *   cellActive      the page shows the cell: its robot is loaded, poses are world poses
 *   chainChoice     {etag, robot_file, from_link, leaves, detail} (GET /api/cell/chain-choice)
 *                   while the cell's URDF robot cannot load until its chain end is chosen, or null
 *   selection       {kind: "target", name, path?} | {kind: "waypoint", path, index} |
 *                   {kind: "fixture", name, target} (target: the cell target the page's target
 *                   still shows, or null) | null
 *   fixture         {name, position_mm, rpy_deg}: the selected fixture's frame in the world as
 *                   moved on the page (saved into the cell after a drag or typed change), or null
 *   cellSave        {state: "saved" | "unsaved" | "saving" | "conflict" | "error" | "review", message,
 *                   retry?: true after a failed save whose move is kept to send again}
 *   jointMap        finished two-joint map (JointMapResult + picture, its PNG data: URL) or null
 *   jointMapJob     {state, done, total, detail} of the two-joint map being computed (state
 *                   "waiting" while its start waits for the server), or null
 *   map3Joints      [i, j, k]: joints of the 3D joint-space view (same indices as mapJoints)
 *   jointMap3       finished three-joint map or null
 *   jointMap3Job    like jointMapJob, for the three-joint map
 *   pathCurve       {path, points: [joints...], branch} joint values along the selected path, or null
 *   targetCheck     {etag, report} of the latest target check (TargetCheckReport) or null
 *   poseCheck       the latest pose diagnosis (PoseDiagnosis) or null
 *   logCheck        the latest log diagnosis (LogDiagnosis) or null
 *   pathReport      {etag, report} of the latest path check (PathCheckReport) or null
 *   sequence        {etag, report} of the latest fastest-sequence search (SequenceReport) or null
 *   placement       the latest base placement ranking (PlacementReport) or null
 *   showReach       draw reach sections under the plan and the elevation
 *   robotMeshes     the robot's link meshes for drawing (RobotMeshesResult.meshes), [] if none
 *   showCapsules    draw the robot's fitted collision capsules instead of its meshes
 *   reachPlan       horizontal reach section at the target (ReachSectionResult + requested_mm + picture) or null
 *   reachElevation  vertical reach section at the target, or null
 *   kernels         {ready, done, total, current} of the server's kernel loading (GET /api/health,
 *                   kernels.js), or null before its first answer
 *
 * Writers: each key has one module that writes it; every other module reads it
 * or asks the owner (cellsync.js asks actions.js to set the fixture, the arm
 * and the selection; meshes.js asks cellsync.showSavedCell to show the cell
 * after an upload). tests/test_store_owners.py checks the literal writes.
 *
 *   actions.js: target, targetInputAt, fixture, joints, selectedBranch, selection, mapJoints,
 *     map3Joints, stepMm, stepDeg, snap, follow, showReach, showCapsules, dragging, dragKind, status,
 *     carriage
 *   linking.js: robot, cellActive, robotMeshes, fk, fkJoints, ik
 *   cellsync.js: cell, cellSave, chainChoice
 *   main.js: robots
 *   review.js: readOnly, reviewerCaps
 *   armstate.js: armState
 *   kernels.js: kernels
 *   meshes.js: meshes
 *   maps.js: jointMap, jointMapJob, jointMap3, jointMap3Job
 *   reach.js: reachPlan, reachElevation
 *   pathcurve.js: pathCurve
 *   panels/targetcheck.js: targetCheck
 *   panels/posecheck.js: poseCheck, logCheck
 *   panels/path.js: pathReport, sequence
 *   panels/placement.js: placement
 *
 * Two writes of linking.js cross owners on purpose, so that the views redraw
 * once: loading a robot resets, in the same update, the keys that belong to
 * the previous robot (target, selectedBranch, joints, mapJoints, map3Joints,
 * jointMap, jointMap3, pathCurve), and an IK answer the arm follows sets
 * joints and selectedBranch together with ik. cellsync.js clears carriage
 * with the saved cell once the track position is saved.
 */
export function initialState() {
  return {
    robots: [],
    robot: null,
    joints: [],
    fk: null,
    fkJoints: null,
    armState: null,
    target: null,
    targetInputAt: 0,
    ik: null,
    selectedBranch: null,
    follow: true,
    dragging: false,
    dragKind: null,
    carriage: null,
    mapJoints: [0, 1],
    stepMm: 10,
    stepDeg: 5,
    snap: false,
    status: { level: "info", message: "Loading…" },
    readOnly: false,
    reviewerCaps: null,
    cell: null,
    meshes: {},
    cellActive: false,
    chainChoice: null,
    selection: null,
    fixture: null,
    cellSave: { state: "saved", message: "" },
    jointMap: null,
    jointMapJob: null,
    map3Joints: [0, 1, 2],
    jointMap3: null,
    jointMap3Job: null,
    pathCurve: null,
    targetCheck: null,
    poseCheck: null,
    logCheck: null,
    pathReport: null,
    sequence: null,
    placement: null,
    showReach: false,
    robotMeshes: [],
    showCapsules: false,
    reachPlan: null,
    reachElevation: null,
    kernels: null,
  };
}

/**
 * A store with subscribe/notify.
 * @param {{initial: object}} options
 */
export function createStore({ initial }) {
  let state = Object.freeze({ ...initial });
  const listeners = new Set();

  function get() {
    return state;
  }

  /** Merge `patch`; listeners whose keys changed are called with (state, {changed, reason}). */
  function update(patch, { reason = "" } = {}) {
    const changed = Object.keys(patch).filter((key) => !Object.is(state[key], patch[key]));
    if (changed.length === 0) {
      return;
    }
    state = Object.freeze({ ...state, ...patch });
    for (const listener of [...listeners]) {
      if (listener.keys === null || listener.keys.some((key) => changed.includes(key))) {
        listener.callback(state, { changed, reason });
      }
    }
  }

  /**
   * Call `callback(state, info)` after updates touching `keys` (all updates when null).
   * Returns the function that unsubscribes.
   */
  function subscribe(callback, { keys = null } = {}) {
    const listener = { callback, keys };
    listeners.add(listener);
    return () => listeners.delete(listener);
  }

  return { get, update, subscribe };
}
