// Path panel: check a path of the cell and time it. Shows whether it is
// free of errors, the cycle time (rest to rest, the upper bound, and blended
// through the waypoints), each segment's motion, both durations and
// smallest clearance, and the findings tied to a segment and a position along
// it. Clicking a finding moves the arm to that place: the joint values are
// interpolated between the segment's waypoint configurations (exact for a
// joint move, an approximation along a linear move).
//
// "Fastest sequence" asks for the fastest consistent IK solution per waypoint
// (drawn on the joint map and the 3D joint view) and says the saving in words;
// "Use this sequence" writes its joint values into the path (If-Match, like every
// edit). The export links download the timed motion as plain numbers.

import { element } from "./fields.js";
import { formatLength, formatNumber } from "../units.js";

/** Joint values a fraction of the way between two configurations. */
function lengthOrDash(mm) {
  return mm === null || mm === undefined ? "–" : formatLength(mm);
}

export function interpolateJoints(a, b, fraction) {
  return a.map((value, k) => value + fraction * (b[k] - value));
}

/** A duration in seconds with two decimals, or `missing` when there is none. */
function seconds(value, missing = "–") {
  return value === null || value === undefined ? missing : `${formatNumber(value, { decimals: 2 })} s`;
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object}} options
 */
export function createPathPanel({ container, store, actions, api, onUseSequence }) {
  const select = element("select", { attributes: { id: "path-select", "aria-label": "Path" } });
  const run = element("button", { text: "Check the path", attributes: { type: "button", id: "path-check" } });
  const optimise = element("button", { text: "Fastest sequence", attributes: { type: "button", id: "path-optimise" } });
  const use = element("button", { text: "Use this sequence", attributes: { type: "button", id: "path-use-sequence", "data-edits-cell": "" } });
  const exportCsv = element("a", { text: "Export CSV", attributes: { id: "path-export-csv", download: "" } });
  const exportJson = element("a", { text: "JSON", attributes: { id: "path-export-json", download: "" } });
  const summary = element("p", { className: "pb-note", attributes: { id: "path-summary" } });
  const sequenceNote = element("p", { className: "pb-note", attributes: { id: "path-sequence" } });
  const segments = element("div", { attributes: { id: "path-segments" } });
  const findings = element("ul", { className: "pb-findings", attributes: { id: "path-findings" } });
  container.append(
    element("div", { className: "pb-controls" }, [element("label", { text: "Path " }, [select]), run, optimise, exportCsv, exportJson]),
    summary,
    element("div", { className: "pb-controls" }, [sequenceNote, use]),
    segments,
    findings,
  );
  use.hidden = true;
  let pathsKey = null;

  async function findSequence() {
    const { cell } = store.get();
    if (!cell || !select.value) {
      return;
    }
    const etag = cell.etag;
    sequenceNote.textContent = `Searching the fastest sequence of ${select.value}…`;
    try {
      const report = await api.pathSequence(select.value);
      store.update({ sequence: { etag, report } });
    } catch (error) {
      sequenceNote.textContent = `Sequence search failed: ${error.message}`;
    }
  }
  optimise.addEventListener("click", findSequence);

  use.addEventListener("click", async () => {
    const { sequence } = store.get();
    if (!sequence || !sequence.report.edits.length) {
      return;
    }
    use.disabled = true;
    const saved = await onUseSequence(sequence.report.path, sequence.report.edits, sequence.etag);
    use.disabled = false;
    if (saved) {
      await findSequence();
    }
  });

  function exportLinks() {
    const name = select.value;
    for (const [link, kind] of [[exportCsv, "csv"], [exportJson, "json"]]) {
      if (name) {
        link.href = `/api/cell/paths/${encodeURIComponent(name)}/export.${kind}`;
        link.hidden = false;
      } else {
        link.removeAttribute("href");
        link.hidden = true;
      }
    }
  }
  select.addEventListener("change", exportLinks);

  function renderSequence() {
    const { cell, sequence } = store.get();
    if (!sequence || sequence.report.path !== select.value) {
      sequenceNote.textContent = "";
      use.hidden = true;
      return;
    }
    const { report, etag } = sequence;
    const stale = !cell || cell.etag !== etag;
    const times = report.best
      ? ` (rest to rest: ${seconds(report.best.cycle_time_s)} against ${seconds(report.current.cycle_time_s)} now)`
      : "";
    const edits = report.edits.length
      ? ` Using it gives ${report.edits.length} waypoint${report.edits.length === 1 ? "" : "s"} as joint values.`
      : "";
    sequenceNote.textContent = `Fastest sequence: ${report.summary}${times}.${stale ? " The cell changed since: search again." : edits}`;
    use.hidden = !report.edits.length;
    use.disabled = stale || Boolean(store.get().readOnly);
  }

  async function check() {
    const { cell } = store.get();
    if (!cell || !select.value) {
      return;
    }
    const etag = cell.etag;
    summary.textContent = `Checking ${select.value}…`;
    try {
      const report = await api.pathCheck(select.value);
      store.update({ pathReport: { etag, report } });
    } catch (error) {
      summary.textContent = `Path check failed: ${error.message}`;
    }
  }
  run.addEventListener("click", check);

  function findingPlace(report, finding) {
    if (finding.segment_index === null || finding.segment_index === undefined) {
      return null;
    }
    // segment k runs from waypoint k to waypoint k + 1
    const start = report.waypoints[finding.segment_index];
    const end = report.waypoints[finding.segment_index + 1];
    return start && end && start.joints_deg && end.joints_deg
      ? interpolateJoints(start.joints_deg, end.joints_deg, finding.fraction_worst)
      : null;
  }

  function render() {
    const { cell, pathReport } = store.get();
    if (cell) {
      const names = cell.scene.paths.map((p) => p.name);
      if (pathsKey !== names.join("|")) {
        pathsKey = names.join("|");
        select.replaceChildren(...names.map((name) => new Option(name, name)));
        exportLinks();
      }
    }
    renderSequence();
    if (!pathReport) {
      summary.textContent = "Choose a path and check it.";
      return;
    }
    const { report, etag } = pathReport;
    const stale = !cell || cell.etag !== etag ? " (the cell changed since: check again)" : "";
    summary.textContent =
      `${report.path}: ${report.ok ? "no errors" : `${report.errors} errors`}, ${report.warnings} warnings; ` +
      `cycle time ${seconds(report.cycle_time_s, "not timed")} rest to rest, ${seconds(report.blended_cycle_time_s, "not timed")} blended; ` +
      `environment clearance ${lengthOrDash(report.environment_clearance_mm)}${report.closest_environment ? ` (${report.closest_environment})` : ""}, ` +
      `self-clearance ${lengthOrDash(report.self_clearance_mm)}${report.closest_self ? ` (${report.closest_self})` : ""}.${stale}`;
    const rows = report.segments.map((segment) =>
      element("tr", {}, [
        element("td", { text: String(segment.index + 1) }),
        element("td", { text: `${segment.from_waypoint} → ${segment.to_waypoint}` }),
        element("td", { text: segment.motion === "linear" ? "linear" : "joint" }),
        element("td", { className: "pb-num", text: seconds(segment.duration_s) }),
        element("td", { className: "pb-num", text: seconds(segment.blended_duration_s) }),
        element("td", { className: "pb-num", text: lengthOrDash(segment.environment_clearance_mm) }),
        element("td", { className: "pb-num", text: lengthOrDash(segment.self_clearance_mm) }),
        element("td", { text: segment.speed_capped ? `capped at ${formatNumber(segment.speed_used_mm_s)} mm/s` : "" }),
      ]),
    );
    segments.replaceChildren(
      element("table", { className: "pb-solutions" }, [
        element("thead", {}, [element("tr", {}, ["#", "Segment", "Move", "Rest to rest", "Blended", "Environment clearance", "Self-clearance", "Speed"].map((text) => element("th", { text })))]),
        element("tbody", {}, rows),
      ]),
    );
    // findings of one kind and cause (an object pair, a joint) that repeat: one item with the
    // count and the worst instance (the server's finding_groups)
    const groupKey = (finding) => `${finding.severity}|${finding.kind}|${finding.cause}`;
    const repeated = new Map(
      (report.finding_groups || []).filter((group) => group.count > 1).map((group) => [groupKey(group), group]),
    );
    const shown = new Set();
    const listed = [];
    for (const finding of report.findings) {
      const group = finding.cause ? repeated.get(groupKey(finding)) : undefined;
      if (group && shown.has(groupKey(finding))) {
        continue;
      }
      if (group) {
        shown.add(groupKey(finding));
      }
      listed.push({ finding: group ? group.worst : finding, count: group ? group.count : 1 });
    }
    findings.replaceChildren(
      ...listed.map(({ finding, count }) => {
        const where = finding.segment_index === null ? "" : `segment ${finding.segment_index + 1} at ${formatNumber(100 * finding.fraction_worst, { decimals: 0 })} %: `;
        const times = count > 1 ? `${count} × ${finding.cause}, worst at ` : "";
        const item = element("li", { attributes: { "data-severity": finding.severity, "data-count": String(count), tabindex: "0" } }, [
          element("span", { className: "pb-severity", text: finding.severity }),
          ` ${times}${where}${finding.message}`,
        ]);
        const place = findingPlace(report, finding);
        if (place) {
          item.addEventListener("click", () => actions.setJoints(place, { reason: "path-finding" }));
        }
        return item;
      }),
    );
  }

  store.subscribe(render, { keys: ["cell", "pathReport", "sequence"] });
  return { render };
}
