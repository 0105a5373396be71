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

/**
 * The solution the arm follows the target onto, and a note when the choice is
 * not the plain one. Never an out-of-limit solution while one within limits
 * exists: the followed branch within limits first, else the nearest solution
 * within limits on another branch (said in the note); only when no solution
 * is within limits, the nearest one, also said.
 * @returns {{solution: object|null, note: string}}
 */
export function chooseFollowed({ solutions, branch, joints }) {
  const within = solutions.filter((s) => s.within_limits);
  if (within.length === 0) {
    const nearest = nearestSolution({ solutions, joints });
    return { solution: nearest, note: nearest ? "no solution within the joint limits: the arm is shown beyond a limit" : "" };
  }
  if (branch === null) {
    return { solution: nearestSolution({ solutions: within, joints }), note: "" };
  }
  const onFollowed = followSolution({ solutions: within, branch, joints });
  if (onFollowed) {
    return { solution: onFollowed, note: "" };
  }
  const other = nearestSolution({ solutions: within, joints });
  const beyond = followSolution({ solutions, branch, joints });
  const why = beyond ? "is beyond a joint limit here" : "does not reach the target";
  return { solution: other, note: `branch "${branch.label}" ${why}: the arm follows on "${other.branch}" within limits` };
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

/**
 * The branch words of a solution without its extra revolutions: "front, up, positive",
 * "left", or "" for an arm without branches (the answer's `branch_parts` fields).
 */
export function branchPartsText(solution) {
  return Object.values(solution.branch_parts).join(", ");
}

/** Whether a solution is on exactly the branch kept in the store (all three signs). */
export function sameBranch(solution, branch) {
  return branch !== null && ["shoulder", "elbow", "wrist"].every((part) => solution[part] === branch[part]);
}

/** A cell target's required branch as the store keeps a branch (its words and signs), or null. */
export function branchFromRequirement(target) {
  if (!target.branch_signs) {
    return null;
  }
  const words = ["shoulder", "elbow", "wrist"].filter((part) => target.branch[part]).map((part) => target.branch[part]);
  return { label: words.join(", "), ...target.branch_signs };
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
