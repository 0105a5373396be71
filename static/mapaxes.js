// The axes a joint map can use: the cell's joint vector, the robot's joints then the
// cell's external axes (track, turntables), each with its name, unit and range; and the
// current value of each (an external axis at the cell's value, the track at the
// carriage's dragged value while it is dragged). A joint map over an external axis is
// computed by the server with the scene posed at every value of that axis.

/** Axes of the cell's joint vector: [{name, unit, lower, upper, external, kind}]. */
export function mapAxes(state) {
  const joints = state.robot ? state.robot.joints.map((joint) => ({ ...joint, external: false, kind: "joint" })) : [];
  const external = state.cellActive ? state.cell?.scene?.external_axes || [] : [];
  return [
    ...joints,
    ...external.map((axis) => ({ name: axis.name, unit: axis.unit, lower: axis.lower, upper: axis.upper, external: true, kind: axis.kind })),
  ];
}

/** Current values of the cell's joint vector (deg, mm), in the order of `mapAxes`. */
export function mapValues(state) {
  const external = state.cellActive ? state.cell?.scene?.external_axes || [] : [];
  return [
    ...state.joints,
    ...external.map((axis) => (axis.kind === "track" && state.carriage ? state.carriage.value_mm : axis.value)),
  ];
}

/**
 * A solution's value on map axis `index`: its own joint value, or for an external axis the
 * value the solution was found at (the cell's current one).
 */
export function solutionValue(solution, index, values) {
  return index < solution.joints_deg.length ? solution.joints_deg[index] : values[index];
}

/** Whether every chosen index names an axis of `axes`. */
export function axesExist(axes, chosen) {
  return chosen.every((index) => index >= 0 && index < axes.length);
}
