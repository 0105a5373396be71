// Joint values along the selected path, for the 3D joint-space view: every
// waypoint solved by inverse kinematics in order, each on the followed branch
// and nearest the previous waypoint's configuration (joint waypoints keep
// their given values). The curve joins the waypoint configurations by straight
// lines in joint space.

import { followSolution, nearestSolution } from "./branches.js";
import { cellFrames } from "./linking.js";

/**
 * @param {{store: object, api: object}} options
 */
export function createPathCurve({ store, api }) {
  let generation = 0;

  async function compute() {
    generation += 1;
    const mine = generation;
    const state = store.get();
    const { cell, selection, cellActive, robot } = state;
    const name = selection ? selection.path || null : null;
    const path = cellActive && cell && name ? cell.scene.paths.find((p) => p.name === name) : null;
    if (!path || !robot) {
      store.update({ pathCurve: null });
      return;
    }
    const points = [];
    let previous = state.joints;
    for (const waypoint of path.waypoints) {
      let q = waypoint.joints_deg;
      if (!q) {
        const pose = { position_mm: waypoint.position_mm, rpy_deg: waypoint.rpy_deg };
        const result = await api.ik({ robot: robot.robot, pose, seed_deg: previous, ...cellFrames(state) });
        const within = result.solutions.filter((s) => s.within_limits);
        const chosen = state.selectedBranch
          ? followSolution({ solutions: within, branch: state.selectedBranch, joints: previous })
          : nearestSolution({ solutions: within, joints: previous });
        q = chosen ? chosen.joints_deg : null;
      }
      if (mine !== generation) {
        return;
      }
      if (q) {
        points.push(q);
        previous = q;
      }
    }
    store.update({ pathCurve: { path: path.name, points } });
  }

  store.subscribe(() => compute().catch(() => store.update({ pathCurve: null })), { keys: ["selection", "cell", "cellActive"] });
}
