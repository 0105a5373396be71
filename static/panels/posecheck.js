// Pose check panel: paste joint values (one pose) or a CSV controller log, or
// load a log file, and see it diagnosed in the cell. A pose shows its TCP,
// branch, margins, singularity, clearance with the closest object, nearest
// targets and the other branches. A log shows a timeline of the smallest
// limit margin, the clearance and the manipulability per row, with the worst
// row highlighted and branch changes and velocity jumps marked; the scrub bar
// and the play button move the arm through the log on both sides.

/* global Plotly */

import { element } from "./fields.js";
import { PLOT_CONFIG } from "../views/plotting.js";
import { formatJoint, formatLength, formatNumber } from "../units.js";

// playback without a time column: rows per second at 1× (common practice, no source)
const ROWS_PER_S_WITHOUT_TIME = 25;
const PLAY_SPEEDS = [0.25, 0.5, 1, 2, 4];

/** Joint values per row of a CSV log, in the robot's joint order (a header names the joints). */
export function parseLogJoints(text, jointNames) {
  const lines = text.split(/\r?\n/).filter((line) => line.trim() !== "");
  const header = lines[0].split(",").map((name) => name.trim());
  const columns = jointNames.map((name) => header.indexOf(name));
  return lines.slice(1).map((line) => {
    const values = line.split(",");
    return columns.map((column) => Number(values[column]));
  });
}

/** Whether pasted text is a log (a header line naming a joint) rather than one pose. */
export function looksLikeLog(text, jointNames) {
  const first = text.trim().split(/\r?\n/)[0] || "";
  return jointNames.some((name) => first.split(",").map((s) => s.trim()).includes(name));
}

/** Numbers of a pasted pose: separated by commas, semicolons or spaces. */
export function parsePose(text) {
  return text.trim().split(/[\s,;]+/).filter(Boolean).map(Number);
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object, palette: object}} options
 */
export function createPoseCheckPanel({ container, store, actions, api, palette }) {
  const input = element("textarea", {
    attributes: { id: "pose-input", rows: "3", "aria-label": "Joint values, or a CSV log with a header of joint names", placeholder: "Joint values (deg; mm for prismatic joints), e.g. 10, 20, -30, 0, 60, 0 — or paste a CSV log" },
  });
  const check = element("button", { text: "Diagnose", attributes: { type: "button", id: "pose-check" } });
  const current = element("button", { text: "Use the arm's joints", attributes: { type: "button", id: "pose-current" } });
  const file = element("input", { attributes: { type: "file", id: "log-file", accept: ".csv,text/csv", "aria-label": "Load a CSV log" } });
  const result = element("div", { attributes: { id: "pose-result" } });
  const timeline = element("div", { className: "pb-plot pb-plot-timeline", attributes: { id: "log-timeline" } });
  const scrub = element("input", { attributes: { type: "range", id: "log-scrub", min: "0", max: "0", step: "1", "aria-label": "Log row" } });
  const play = element("button", { text: "Play", attributes: { type: "button", id: "log-play" } });
  const rowText = element("output", { attributes: { id: "log-row" } });
  const speed = element("select", { attributes: { id: "log-speed", "aria-label": "Playback speed" } });
  speed.replaceChildren(...PLAY_SPEEDS.map((value) => new Option(`${value}×`, String(value), value === 1, value === 1)));
  const player = element("div", { className: "pb-controls", attributes: { id: "log-player" } }, [play, speed, scrub, rowText]);
  container.append(
    input,
    element("div", { className: "pb-controls" }, [check, current, element("label", { text: "Log file " }, [file])]),
    result,
    timeline,
    player,
  );
  player.hidden = true;
  timeline.hidden = true;
  let logJoints = [];
  let playing = null;
  let clickBound = false;

  function jointNames() {
    const { robot } = store.get();
    return robot ? robot.joints.map((joint) => joint.name) : [];
  }

  async function diagnose(text, source) {
    const { robot, cellActive } = store.get();
    if (!robot || !cellActive) {
      actions.setStatus("warn", "The pose check works on the cell's robot: show the cell first.");
      return;
    }
    try {
      if (looksLikeLog(text, jointNames())) {
        const log = await api.diagnoseLog(text, source);
        logJoints = parseLogJoints(text, jointNames());
        store.update({ logCheck: log, poseCheck: null });
      } else {
        const joints = parsePose(text);
        const pose = await api.diagnosePose(joints);
        store.update({ poseCheck: pose, logCheck: null });
      }
    } catch (error) {
      result.replaceChildren(element("p", { className: "pb-error", text: error.message }));
    }
  }

  check.addEventListener("click", () => diagnose(input.value, "pasted log"));
  current.addEventListener("click", () => {
    input.value = store.get().joints.map((v) => formatNumber(v, { decimals: 2 })).join(", ");
    diagnose(input.value, "pasted pose");
  });
  file.addEventListener("change", async () => {
    const chosen = file.files[0];
    if (chosen) {
      diagnose(await chosen.text(), chosen.name);
    }
  });

  function closestText(closest) {
    return closest ? `${formatLength(closest.distance_mm)} (${closest.capsule} – ${closest.other})` : "–";
  }

  function poseView(pose) {
    const lines = [
      ["TCP (world)", `${pose.tcp_world.position_mm.map((v) => formatNumber(v)).join(", ")} mm; rpy ${pose.tcp_world.rpy_deg.map((v) => formatNumber(v)).join(", ")} deg`],
      ["Branch", pose.branch || "–"],
      ["Within limits", pose.within_limits ? "yes" : "no"],
      ["Smallest margin", pose.min_margin_joint ? `${pose.min_margin_joint} (${formatNumber(100 * pose.min_margin_fraction, { decimals: 0 })} % of its range)` : "–"],
      ["Singularity", pose.singularity ? `${pose.singularity.kind}; wrist bend ${formatNumber(pose.singularity.wrist_bend_deg)} deg` : "–"],
      ["Manipulability", formatNumber(pose.manipulability, { decimals: 4 })],
      ["Environment clearance", closestText(pose.closest_environment)],
      ["Self-clearance", closestText(pose.closest_self)],
      ["Nearest target", pose.nearest_targets.length ? `${pose.nearest_targets[0].name} (${formatLength(pose.nearest_targets[0].distance_mm)}, ${formatNumber(pose.nearest_targets[0].angle_deg)} deg)` : "–"],
    ];
    const rows = lines.map(([name, value]) => element("tr", {}, [element("th", { text: name }), element("td", { text: value })]));
    const show = element("button", { text: "Move the arm here", attributes: { type: "button", id: "pose-show" } });
    show.addEventListener("click", () => actions.setJoints([...pose.joints_deg], { reason: "pose-check" }));
    return [element("table", { className: "pb-facts", attributes: { id: "pose-facts" } }, rows), otherBranches(pose), show, findingList(pose.findings)];
  }

  /** The other branches of the same TCP pose as a compact table, without the pose's own. */
  function otherBranches(pose) {
    const others = pose.branches.filter((_, k) => k !== pose.input_branch);
    if (others.length === 0) {
      return element("p", { className: "pb-note", text: "No other branch reaches this TCP pose." });
    }
    const cell = (text) => element("td", { text });
    const head = element("tr", {}, ["Other branch", "Limits", "Clearance", "Usable"].map((text) => element("th", { text })));
    const body = others.map((b) =>
      element("tr", {}, [
        cell(b.branch),
        cell(b.within_limits ? "within" : "beyond"),
        cell(b.clearance_mm === null ? "–" : formatLength(b.clearance_mm)),
        cell(b.usable ? "yes" : "no"),
      ]),
    );
    return element("table", { className: "pb-solutions pb-other-branches", attributes: { id: "pose-other-branches" } }, [head, ...body]);
  }

  function findingList(findings) {
    return element("ul", { className: "pb-findings" }, findings.map((f) =>
      element("li", { attributes: { "data-severity": f.severity } }, [element("span", { className: "pb-severity", text: f.severity }), ` ${f.message}`]),
    ));
  }

  /** The external axis values of a log row, as " · track 1500.0 mm, table-1 0.0 deg" ("" without). */
  function externalText(row) {
    const { logCheck } = store.get();
    const values = logCheck && logCheck.rows && logCheck.rows.external ? logCheck.rows.external[row] : null;
    if (!values || !values.length) {
      return "";
    }
    return ` · ${logCheck.external_names.map((name, k) => `${name} ${formatJoint(values[k], logCheck.external_units[k])}`).join(", ")}`;
  }

  function moveToRow(row) {
    const joints = logJoints[row];
    if (joints && joints.every(Number.isFinite)) {
      scrub.value = String(row);
      rowText.textContent = `row ${row}${externalText(row)}`;
      actions.setJoints([...joints], { reason: "log" });
      if (timeline.data) {
        Plotly.relayout(timeline, { "shapes[1].x0": row, "shapes[1].x1": row });
      }
    }
  }

  function drawTimeline(log) {
    const rows = log.rows;
    const x = rows.line.map((_, k) => k);
    const worst = log.worst_row.row;
    const marginPercent = rows.min_margin_fraction.map((v) => (v === null ? null : 100 * v));
    const traces = [
      { x, y: marginPercent, name: "smallest limit margin (% of range)", yaxis: "y", line: { color: palette["branch-1"] } },
      { x, y: rows.clearance_mm, name: "clearance (mm)", yaxis: "y2", line: { color: palette["branch-3"] } },
      { x, y: rows.manipulability, name: "manipulability", yaxis: "y3", line: { color: palette["branch-5"] } },
      {
        x: log.branch_changes.map((change) => change.row),
        y: log.branch_changes.map(() => 0),
        yaxis: "y3",
        mode: "markers",
        name: "branch change",
        marker: { symbol: "triangle-up", size: 10, color: palette.warn },
        text: log.branch_changes.map((change) => `${change.part}: ${change.before} → ${change.after}`),
        hovertemplate: "%{text}<extra>row %{x}</extra>",
      },
      {
        x: log.velocity.jumps.map((jump) => jump.row),
        y: log.velocity.jumps.map(() => 0),
        yaxis: "y2",
        mode: "markers",
        name: "velocity jump",
        marker: { symbol: "x", size: 9, color: palette.bad },
        text: log.velocity.jumps.map((jump) => `${jump.joint} ${formatNumber(jump.ratio, { decimals: 1 })}× its limit`),
        hovertemplate: "%{text}<extra>row %{x}</extra>",
      },
    ].map((trace) => ({ type: "scatter", mode: "lines", ...trace }));
    const axis = (domain, title) => ({ domain, title: { text: title, font: { size: 10 }, standoff: 4 }, zeroline: true, gridcolor: "#eceff2", automargin: true });
    Plotly.react(
      timeline,
      traces,
      {
        margin: { l: 64, r: 12, t: 18, b: 96 },
        showlegend: true,
        legend: { orientation: "h", x: 0, y: -0.2, yanchor: "top", font: { size: 10 } },
        xaxis: { anchor: "y3", title: { text: "log row", standoff: 4 }, range: [0, Math.max(1, x.length - 1)], automargin: true },
        yaxis: axis([0.7, 1], "margin %"),
        yaxis2: axis([0.36, 0.64], "clear. mm"),
        yaxis3: axis([0, 0.3], "manip."),
        shapes: [
          { type: "rect", xref: "x", yref: "paper", x0: worst - 0.5, x1: worst + 0.5, y0: 0, y1: 1, fillcolor: "rgba(213, 94, 0, 0.25)", line: { width: 0 } },
          { type: "line", xref: "x", yref: "paper", x0: 0, x1: 0, y0: 0, y1: 1, line: { color: palette.ink, width: 1 } },
        ],
        annotations: [{ xref: "x", yref: "paper", x: worst, y: 1, yanchor: "bottom", text: `worst row ${worst}`, showarrow: false, font: { size: 10, color: palette.bad } }],
        font: { family: "DejaVu Sans, Liberation Sans, sans-serif", size: 11 },
        paper_bgcolor: "rgba(0,0,0,0)",
      },
      PLOT_CONFIG,
    );
    if (!clickBound) {
      clickBound = true;
      timeline.on("plotly_click", (event) => {
        if (event.points.length) {
          moveToRow(Math.round(event.points[0].x));
        }
      });
    }
  }

  function logView(log) {
    const worst = log.worst_row;
    const facts = [
      ["Rows", `${log.row_count}${log.duration_s ? ` over ${formatNumber(log.duration_s, { decimals: 2 })} s` : ""}`],
      ["Worst row", `row ${worst.row} (line ${worst.line}): ${worst.reason}`],
      ["Smallest clearance", log.min_clearance ? `${formatLength(log.min_clearance.value)} at row ${log.min_clearance.row}` : "–"],
      ["Branch changes", String(log.branch_change_count)],
      ["Velocity jumps", log.velocity.checked ? String(log.velocity.jump_count) : `not checked: ${log.velocity.reason}`],
    ];
    const axes = log.external_names || [];
    if (axes.length) {
      const words = axes.map((name, k) =>
        (log.external_logged || []).includes(name)
          ? `${name} (${log.external_units[k]}) from the log`
          : `${name} at ${formatJoint(log.external_defaults[name], log.external_units[k])} (no column)`,
      );
      facts.push(["External axes", words.join("; ")]);
    }
    const rows = facts.map(([name, value]) => element("tr", {}, [element("th", { text: name }), element("td", { text: value })]));
    const jump = element("button", { text: "Go to the worst row", attributes: { type: "button", id: "log-worst" } });
    jump.addEventListener("click", () => {
      stopPlaying();
      moveToRow(worst.row);
    });
    return [element("table", { className: "pb-facts", attributes: { id: "log-facts", "data-worst-row": String(worst.row) } }, rows), jump, findingList(log.findings)];
  }

  /** Stop playback (a click on Pause, "Go to the worst row", the end of the log, a new log). */
  function stopPlaying() {
    if (playing !== null) {
      clearTimeout(playing);
      playing = null;
    }
    play.textContent = "Play";
  }

  /**
   * Seconds of the log between two rows: the time column where the log has one,
   * else ROWS_PER_S_WITHOUT_TIME rows per second; the playback runs at this
   * pace times the chosen speed.
   */
  function rowGapS(from, to) {
    const times = logTimes();
    if (times && Number.isFinite(times[from]) && Number.isFinite(times[to])) {
      return Math.max(0, times[to] - times[from]);
    }
    return (to - from) / ROWS_PER_S_WITHOUT_TIME;
  }

  function logTimes() {
    const { logCheck } = store.get();
    return logCheck && logCheck.rows ? logCheck.rows.time_s : null;
  }

  play.addEventListener("click", () => {
    if (playing !== null) {
      stopPlaying();
      return;
    }
    play.textContent = "Pause";
    if (Number(scrub.value) >= Number(scrub.max)) {
      moveToRow(0);
    }
    // the clock of the log: the row shown is the last one whose log time has passed
    const startRow = Number(scrub.value);
    const startedAt = performance.now();
    const step = () => {
      const elapsedS = ((performance.now() - startedAt) / 1000) * Number(speed.value);
      let row = Number(scrub.value);
      while (row < Number(scrub.max) && rowGapS(startRow, row + 1) <= elapsedS) {
        row += 1;
      }
      if (row !== Number(scrub.value)) {
        moveToRow(row);
      }
      if (row >= Number(scrub.max)) {
        stopPlaying();
        return;
      }
      const waitS = (rowGapS(startRow, row + 1) - elapsedS) / Number(speed.value);
      playing = setTimeout(step, Math.max(16, 1000 * waitS));
    };
    playing = setTimeout(step, 16);
  });
  scrub.addEventListener("input", () => moveToRow(Number(scrub.value)));

  function render() {
    const { poseCheck, logCheck } = store.get();
    timeline.hidden = !logCheck;
    player.hidden = !logCheck;
    if (poseCheck) {
      result.replaceChildren(...poseView(poseCheck));
    } else if (logCheck) {
      stopPlaying();
      result.replaceChildren(...logView(logCheck));
      scrub.max = String(Math.max(0, logCheck.row_count - 1));
      drawTimeline(logCheck);
      moveToRow(logCheck.worst_row.row);
    }
  }

  store.subscribe(render, { keys: ["poseCheck", "logCheck"] });
  return { render };
}
