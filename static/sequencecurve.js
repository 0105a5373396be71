// The fastest solution sequence of a path (GET /api/cell/paths/{name}/sequence) drawn in
// joint space: the chosen configurations joined in waypoint order (straight lines in joint
// space, as the joint map shows the path), every other candidate configuration faint.
// Used by the joint map (two joints) and the 3D joint view (three joints).

/** A key that changes when the drawn sequence changes. */
export function sequenceKey(sequence) {
  return sequence ? `${sequence.etag}|${sequence.report.path}` : "no sequence";
}

function chosenPoints(report) {
  return report.best ? report.best.waypoints.map((w) => w.joints_deg).filter((q) => q !== null) : [];
}

function candidatePoints(report) {
  return report.candidates.flatMap((layer, w) =>
    layer.joints_deg.filter((_, k) => k !== report.chosen_indices[w]),
  );
}

/**
 * Plotly traces of a sequence over joints `axes` (two: 2D scatter, three: scatter3d).
 * @param {{etag: string, report: object} | null} sequence
 * @param {number[]} axes joint indices
 * @param {object} palette colour table (palette.js)
 */
export function sequenceTraces(sequence, axes, palette) {
  if (!sequence) {
    return [];
  }
  const three = axes.length === 3;
  const type = three ? "scatter3d" : "scatter";
  const coords = (points) => {
    const out = { x: points.map((q) => q[axes[0]]), y: points.map((q) => q[axes[1]]) };
    if (three) {
      out.z = points.map((q) => q[axes[2]]);
    }
    return out;
  };
  const chosen = chosenPoints(sequence.report);
  return [
    {
      type,
      mode: "markers",
      name: "other candidates",
      ...coords(candidatePoints(sequence.report)),
      marker: { size: three ? 2.5 : 6, color: palette["ink-muted"], opacity: 0.3 },
      hoverinfo: "skip",
      meta: { role: "sequence-candidates" },
    },
    {
      type,
      mode: "lines+markers",
      name: "fastest sequence",
      ...coords(chosen),
      text: sequence.report.best ? sequence.report.best.waypoints.map((w) => `${w.name}: ${w.branch}`) : [],
      line: { color: palette.accent, width: three ? 5 : 2.5 },
      marker: { size: three ? 4 : 8, color: palette.accent },
      hovertemplate: "%{text}<extra>fastest sequence</extra>",
      meta: { role: "sequence" },
    },
  ];
}
