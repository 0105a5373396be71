// Page entry: builds the store, the views and panels, and links them to the server.

import { createApiClient } from "./api.js";
import { createArmState } from "./armstate.js";
import { createActions } from "./actions.js";
import { createCellSync } from "./cellsync.js";
import { createLinking } from "./linking.js";
import { createMaps } from "./maps.js";
import { createMeshFixtures } from "./meshes.js";
import { createPathCurve } from "./pathcurve.js";
import { createJobPacer, jobPacing } from "./pacing.js";
import { createKernelProgress } from "./kernels.js";
import { createReachSections } from "./reach.js";
import { readPalette } from "./palette.js";
import { createStore, initialState } from "./state.js";
import { createJointMapView } from "./views/jointmap.js";
import { createJointSpaceView } from "./views/jointspace3d.js";
import { createProjectionView } from "./views/projection.js";
import { createSceneView } from "./views/scene3d.js";
import { createArmStatus } from "./panels/armstatus.js";
import { createCellPanel } from "./panels/cell.js";
import { createPathPanel } from "./panels/path.js";
import { createPlacementPanel } from "./panels/placement.js";
import { createPoseCheckPanel } from "./panels/posecheck.js";
import { createTargetCheckPanel } from "./panels/targetcheck.js";
import { createHeader } from "./panels/header.js";
import { createJointsPanel } from "./panels/joints.js";
import { createMarginsPanel } from "./panels/margins.js";
import { createSolutionsPanel } from "./panels/solutions.js";
import { createTargetPanel } from "./panels/target.js";
import { createToolPanel } from "./panels/tool.js";
import { startReview } from "./review.js";

/** Where a mesh chosen with the button goes: under the shown target, on the floor (else 1 m in front of the base). */
function meshSpot({ target, cell }) {
  const floor = cell ? cell.scene.floor_height_mm : 0;
  if (target) {
    return [target.position_mm[0], target.position_mm[1], floor];
  }
  const base = cell ? cell.scene.base.position_mm : [0, 0, 0];
  return [base[0] + 1000, base[1], floor];
}

async function start() {
  const store = createStore({ initial: initialState() });
  const actions = createActions({ store });
  const api = createApiClient();
  const palette = readPalette();
  const linking = createLinking({ store, actions, api });
  const cellSync = createCellSync({ store, actions, api, linking });
  // the jobs the page starts by itself share one pacer (used on a reviewer's page)
  const pacer = createJobPacer({ pacing: () => jobPacing(store.get().reviewerCaps) });
  const maps = createMaps({ store, api, actions, pacer });
  createArmState({ store, api });
  createPathCurve({ store, api });
  const meshFixtures = createMeshFixtures({ store, api, actions, cellSync });
  createReachSections({ store, api, actions, pacer });
  const byId = (id) => document.getElementById(id);

  const showRobot = (spec) => {
    const { cell } = store.get();
    return cell && spec === cell.robot ? cellSync.loadCell() : linking.loadRobot(spec);
  };
  createHeader({
    select: byId("robot-select"),
    status: byId("status"),
    store,
    onRobotChosen: showRobot,
  });
  createArmStatus({ element: byId("arm-state"), summary: byId("arm-summary"), store });
  createKernelProgress({ api, store, element: byId("kernel-progress") });
  createCellPanel({
    container: byId("cell-panel"),
    store,
    actions,
    onShowCell: () => cellSync.loadCell(),
    onRetrySave: () => cellSync.retrySave(),
    onAddMesh: (file) => meshFixtures.upload(file, meshSpot(store.get())),
    onChooseChain: (links) => cellSync.chooseChain(links),
    onChooseChainEnd: (toLink) => cellSync.chooseChainEnd(toLink),
  });
  createTargetPanel({ container: byId("target-panel"), store, actions });
  createToolPanel({ container: byId("tool-panel"), store });
  createSolutionsPanel({ container: byId("solutions-panel"), store, actions, palette });
  createJointsPanel({ container: byId("joints-panel"), store, actions });
  createMarginsPanel({ container: byId("margins-panel"), store });
  createTargetCheckPanel({ container: byId("target-check-panel"), store, actions, api });
  createPathPanel({
    container: byId("path-panel"),
    store,
    actions,
    api,
    onUseSequence: (path, edits, etag) => cellSync.setWaypointJoints(path, edits, etag),
  });
  // read-only handle for debugging and the browser tests
  window.posebridge = Object.freeze({ getState: store.get });

  // the server's answers are asked for at once; the views that draw with the
  // charting script are made when it has loaded (async: it never holds up the
  // page shell) and draw what has arrived meanwhile
  const loading = (async () => {
    // the first three questions go out together (not one after the other); their answers
    // are used in this order: who is looking, the robot library, the cell
    const review = startReview({ store, api, banner: byId("review-banner"), commentsContainer: byId("comments-panel") });
    const library = api.listRobots();
    const cellAnswer = api.readCell();
    cellAnswer.catch(() => {}); // its failure is loadCell's to report, after the two before it
    await review;
    store.update({ robots: (await library).robots });
    await cellSync.loadCell(cellAnswer);
  })().catch((error) => actions.setStatus("error", error.message));
  try {
    await plotlyLoaded();
    const drawn = [];
    const sceneView = createSceneView({ element: byId("scene3d"), store, palette });
    drawn.push(sceneView);
    drawn.push(createProjectionView({
      element: byId("plan"),
      base: byId("plan-base"),
      overlay: byId("plan-overlay"),
      store,
      actions,
      palette,
      axes: [0, 1],
      depthAxis: 2,
      reachKey: "reachPlan",
      viewerSide: 1,
      onDropFile: (file, position) => meshFixtures.upload(file, position),
      onMoveCarriage: (valueMm) => cellSync.moveCarriage(valueMm),
    }));
    drawn.push(createProjectionView({
      element: byId("elevation"),
      base: byId("elevation-base"),
      overlay: byId("elevation-overlay"),
      store,
      actions,
      palette,
      axes: [0, 2],
      depthAxis: 1,
      reachKey: "reachElevation",
      viewerSide: -1,
      onMoveCarriage: (valueMm) => cellSync.moveCarriage(valueMm),
    }));
    drawn.push(createJointMapView({
      element: byId("joint-map"),
      base: byId("joint-map-base"),
      note: byId("map-note"),
      legend: byId("map-legend"),
      header: byId("map-pair"),
      progress: byId("map-progress-row"),
      store,
      actions,
      palette,
      onCancelMap: () => maps.cancel("2d"),
    }));
    drawn.push(createJointSpaceView({
      element: byId("joint-space-3d"),
      after: sceneView.armDrawn,
      header: byId("map3-joints"),
      note: byId("map3-note"),
      legend: byId("map3-legend"),
      store,
      actions,
      palette,
    }));
    drawn.push(createPoseCheckPanel({ container: byId("pose-check-panel"), store, actions, api, palette }));
    drawn.push(createPlacementPanel({
      container: byId("placement-panel"),
      store,
      actions,
      api,
      palette,
      onMoveBase: (edit) => cellSync.moveBase(edit),
      onMoveRail: (rail) => cellSync.moveRail(rail),
      onMoveTable: (table) => cellSync.moveTable(table),
    }));
    for (const view of drawn) {
      view.render();
    }
    await loading;
  } catch (error) {
    actions.setStatus("error", error.message);
  }
}

/** Resolves when the charting script (loaded async by the page) is there. */
function plotlyLoaded() {
  if (window.Plotly) {
    return Promise.resolve();
  }
  const script = document.getElementById("plotly-script");
  return new Promise((resolve, reject) => {
    script.addEventListener("load", () => resolve(), { once: true });
    script.addEventListener("error", () => reject(new Error("The charting script did not load; reload the page")), { once: true });
  });
}

start();
