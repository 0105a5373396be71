// Selectors of the cell selection: what the store's `selection` points at in
// the cell (a target, a waypoint, a fixture), what a move of the page's target
// moves, and a fixture's family. Pure functions of the store's state; views,
// panels and cellsync.js import them from here.

/** The drawing of the selected target, or null. */
export function selectedTarget({ cell, selection }) {
  if (!cell || !selection) {
    return null;
  }
  let name = selection.kind === "target" ? selection.name : null;
  if (selection.kind === "waypoint") {
    const waypoint = cell.scene.paths.find((p) => p.name === selection.path)?.waypoints[selection.index];
    name = waypoint && waypoint.source === "target" && !waypoint.approach ? waypoint.target : null;
  }
  return cell.scene.targets.find((target) => target.name === name) || null;
}

/** The selected waypoint's drawing, or null. */
export function selectedWaypoint({ cell, selection }) {
  if (!cell || !selection || selection.kind !== "waypoint") {
    return null;
  }
  return cell.scene.paths.find((p) => p.name === selection.path)?.waypoints[selection.index] || null;
}

/** The selected fixture's drawing (its frame in the world), or null. */
export function selectedFixture({ cell, selection }) {
  if (!cell || !selection || selection.kind !== "fixture") {
    return null;
  }
  return cell.scene.fixtures.find((fixture) => fixture.name === selection.name) || null;
}

/**
 * The cell target the page's target shows: the selected target, or while a
 * fixture is selected the target that was shown when it was selected; or null.
 */
export function shownTarget(state) {
  const { cell, selection } = state;
  if (cell && selection && selection.kind === "fixture") {
    return cell.scene.targets.find((target) => target.name === selection.target) || null;
  }
  return selectedTarget(state);
}

/** The selection of fixture `name`, keeping the page's target on the cell target it shows. */
export function fixtureSelection(state, name) {
  const target = shownTarget(state);
  return { kind: "fixture", name, target: target ? target.name : null };
}

/**
 * What a move of the page's target moves in the cell: {kind: "target", name} for
 * a selected target (or a waypoint at a target), {kind: "waypoint", path, index}
 * for a selected waypoint given as a pose, null otherwise (approach and
 * joint-values waypoints, fixtures).
 */
export function movedItem(state) {
  const target = selectedTarget(state);
  if (target) {
    return { kind: "target", name: target.name };
  }
  const waypoint = selectedWaypoint(state);
  if (waypoint && waypoint.source === "pose") {
    return { kind: "waypoint", path: state.selection.path, index: state.selection.index };
  }
  return null;
}

/** Names of fixture `name` and of every fixture under it (children, their children...). */
export function fixtureFamily(fixtures, name) {
  const family = new Set([name]);
  let grown = true;
  while (grown) {
    grown = false;
    for (const fixture of fixtures) {
      if (fixture.parent && family.has(fixture.parent) && !family.has(fixture.name)) {
        family.add(fixture.name);
        grown = true;
      }
    }
  }
  return family;
}
