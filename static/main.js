// Page entry: builds the store, the views and panels, and links them to the server.

import { createApiClient } from "./api.js";
import { createActions } from "./actions.js";
import { createLinking } from "./linking.js";
import { readPalette } from "./palette.js";
import { createStore, initialState } from "./state.js";
import { createJointMapView } from "./views/jointmap.js";
import { createProjectionView } from "./views/projection.js";
import { createSceneView } from "./views/scene3d.js";
import { createHeader } from "./panels/header.js";
import { createJointsPanel } from "./panels/joints.js";
import { createMarginsPanel } from "./panels/margins.js";
import { createSolutionsPanel } from "./panels/solutions.js";
import { createTargetPanel } from "./panels/target.js";
import { createToolPanel } from "./panels/tool.js";

async function start() {
  const store = createStore({ initial: initialState() });
  const actions = createActions({ store });
  const api = createApiClient();
  const palette = readPalette();
  const linking = createLinking({ store, actions, api });
  const byId = (id) => document.getElementById(id);

  createHeader({
    select: byId("robot-select"),
    status: byId("status"),
    store,
    onRobotChosen: (spec) => linking.loadRobot(spec),
  });
  createSceneView({ element: byId("scene3d"), store, palette });
  createProjectionView({
    element: byId("plan"),
    overlay: byId("plan-overlay"),
    store,
    actions,
    palette,
    axes: [0, 1],
    depthAxis: 2,
    viewerSide: 1,
  });
  createProjectionView({
    element: byId("elevation"),
    overlay: byId("elevation-overlay"),
    store,
    actions,
    palette,
    axes: [0, 2],
    depthAxis: 1,
    viewerSide: -1,
  });
  createTargetPanel({ container: byId("target-panel"), store, actions });
  createToolPanel({ container: byId("tool-panel"), store });
  createJointMapView({
    element: byId("joint-map"),
    note: byId("map-note"),
    legend: byId("map-legend"),
    header: byId("map-pair"),
    store,
    actions,
    palette,
  });
  createSolutionsPanel({ container: byId("solutions-panel"), store, actions, palette });
  createJointsPanel({ container: byId("joints-panel"), store, actions });
  createMarginsPanel({ container: byId("margins-panel"), store });

  // read-only handle for debugging and the browser tests
  window.posebridge = Object.freeze({ getState: store.get });

  try {
    const library = await api.listRobots();
    store.update({ robots: library.robots });
    await linking.loadRobot(document.body.dataset.defaultRobot || library.default_robot);
  } catch (error) {
    actions.setStatus("error", error.message);
  }
}

start();
