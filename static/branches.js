// Arm branches of inverse kinematics solutions: which solution the arm
// follows when the target moves.

/** Squared distance between two joint vectors. */
function jointDistance(a, b) {
  return a.reduce((sum, value, i) => sum + (value - b[i]) ** 2, 0);
}

/**
 * Whether a solution lies on the followed branch: every shoulder, elbow and wrist
 * sign agrees, where 0 (undefined at a singularity) agrees with either side.
 */
export function onBranch(solution, branch) {
  return ["shoulder", "elbow", "wrist"].every(
    (part) => solution[part] === 0 || branch[part] === 0 || solution[part] === branch[part],
  );
}

/** The solution to follow: on the branch and nearest the current joints, else nothing. */
export function followSolution({ solutions, branch, joints }) {
  const candidates = solutions.filter((s) => onBranch(s, branch));
  if (candidates.length === 0) {
    return null;
  }
  return candidates.reduce((best, s) =>
    jointDistance(s.joints_deg, joints) < jointDistance(best.joints_deg, joints) ? s : best,
  );
}

/** The solution nearest the current joints (used to find the arm's own branch). */
export function nearestSolution({ solutions, joints }) {
  if (solutions.length === 0) {
    return null;
  }
  return solutions.reduce((best, s) =>
    jointDistance(s.joints_deg, joints) < jointDistance(best.joints_deg, joints) ? s : best,
  );
}

/** The branch of a solution as kept in the store: its words and its three signs. */
export function branchOf(solution) {
  return {
    label: solution.branch,
    shoulder: solution.shoulder,
    elbow: solution.elbow,
    wrist: solution.wrist,
  };
}

/** Heading for a list of solutions: which parts of the arm their branch words name. */
export function branchHeading(solutions) {
  const armWords = solutions.some((s) => s.shoulder !== 0 || s.wrist !== 0);
  if (armWords) {
    return "Branch (shoulder, elbow, wrist)";
  }
  return solutions.some((s) => s.elbow !== 0) ? "Branch (elbow)" : "Solution";
}
