// Path panel: check a path of the cell and time it. Shows whether it is
// free of errors, the cycle time, each segment's motion, duration and
// smallest clearance, and the findings tied to a segment and a position along
// it. Clicking a finding moves the arm to that place: the joint values are
// interpolated between the segment's waypoint configurations (exact for a
// joint move, an approximation along a linear move).

import { element } from "./fields.js";
import { formatLength, formatNumber } from "../units.js";

/** Joint values a fraction of the way between two configurations. */
function lengthOrDash(mm) {
  return mm === null || mm === undefined ? "–" : formatLength(mm);
}

export function interpolateJoints(a, b, fraction) {
  return a.map((value, k) => value + fraction * (b[k] - value));
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object}} options
 */
export function createPathPanel({ container, store, actions, api }) {
  const select = element("select", { attributes: { id: "path-select", "aria-label": "Path" } });
  const run = element("button", { text: "Check the path", attributes: { type: "button", id: "path-check" } });
  const summary = element("p", { className: "pb-note", attributes: { id: "path-summary" } });
  const segments = element("div", { attributes: { id: "path-segments" } });
  const findings = element("ul", { className: "pb-findings", attributes: { id: "path-findings" } });
  container.append(element("div", { className: "pb-controls" }, [element("label", { text: "Path " }, [select]), run]), summary, segments, findings);
  let pathsKey = null;

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
      }
    }
    if (!pathReport) {
      summary.textContent = "Choose a path and check it.";
      return;
    }
    const { report, etag } = pathReport;
    const stale = !cell || cell.etag !== etag ? " (the cell changed since: check again)" : "";
    summary.textContent =
      `${report.path}: ${report.ok ? "no errors" : `${report.errors} errors`}, ${report.warnings} warnings; ` +
      `cycle time ${report.cycle_time_s === null ? "not timed" : `${formatNumber(report.cycle_time_s, { decimals: 2 })} s`}; ` +
      `environment clearance ${lengthOrDash(report.environment_clearance_mm)}${report.closest_environment ? ` (${report.closest_environment})` : ""}, ` +
      `self-clearance ${lengthOrDash(report.self_clearance_mm)}${report.closest_self ? ` (${report.closest_self})` : ""}.${stale}`;
    const rows = report.segments.map((segment) =>
      element("tr", {}, [
        element("td", { text: String(segment.index + 1) }),
        element("td", { text: `${segment.from_waypoint} → ${segment.to_waypoint}` }),
        element("td", { text: segment.motion === "linear" ? "linear" : "joint" }),
        element("td", { className: "pb-num", text: segment.duration_s === null ? "–" : `${formatNumber(segment.duration_s, { decimals: 2 })} s` }),
        element("td", { className: "pb-num", text: lengthOrDash(segment.environment_clearance_mm) }),
        element("td", { className: "pb-num", text: lengthOrDash(segment.self_clearance_mm) }),
        element("td", { text: segment.speed_capped ? `capped at ${formatNumber(segment.speed_used_mm_s)} mm/s` : "" }),
      ]),
    );
    segments.replaceChildren(
      element("table", { className: "pb-solutions" }, [
        element("thead", {}, [element("tr", {}, ["#", "Segment", "Move", "Time", "Environment clearance", "Self-clearance", "Speed"].map((text) => element("th", { text })))]),
        element("tbody", {}, rows),
      ]),
    );
    findings.replaceChildren(
      ...report.findings.map((finding) => {
        const where = finding.segment_index === null ? "" : `segment ${finding.segment_index + 1} at ${formatNumber(100 * finding.fraction_worst, { decimals: 0 })} %: `;
        const item = element("li", { attributes: { "data-severity": finding.severity, tabindex: "0" } }, [
          element("span", { className: "pb-severity", text: finding.severity }),
          ` ${where}${finding.message}`,
        ]);
        const place = findingPlace(report, finding);
        if (place) {
          item.addEventListener("click", () => actions.setJoints(place, { reason: "path-finding" }));
        }
        return item;
      }),
    );
  }

  store.subscribe(render, { keys: ["cell", "pathReport"] });
  return { render };
}
