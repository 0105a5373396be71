// Placement panel: search base poses around the current one (a server job with
// progress and cancel), show the score over the x–y grid for a chosen yaw and
// pedestal height (or the best over all yaws), and the ranked candidates. The
// score is explained in words, candidates within the score's noise are shown
// as ties, and a best candidate slower than the current base is said so.
// Clicking a candidate or a grid cell moves the robot's base there: the cell
// is edited and saved, and both halves follow. The candidates carry
// `data-edits-cell` (review.js disables them for reviewers; the search itself
// changes nothing and stays open to them).

/* global Plotly */

import { runJob } from "../api.js";
import { element, numberField } from "./fields.js";
import { PLOT_CONFIG } from "../views/plotting.js";
import { formatNumber } from "../units.js";

/** The score over x–y (rows y, columns x) for one yaw index, or the best over all yaws (-1). */
const LABEL_SIDES = ["top center", "bottom center", "middle right", "middle left"];

export function scorePlane(grid, yawIndex, heightIndex) {
  return grid.score.map((row) =>
    row.map((cell) => {
      const values = cell.map((perYaw) => perYaw[heightIndex]);
      return yawIndex < 0 ? Math.max(...values) : values[yawIndex];
    }),
  );
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object, palette: object,
 *          onMoveBase: (edit: object) => Promise<void>}} options
 */
export function createPlacementPanel({ container, store, actions, api, palette, onMoveBase }) {
  const width = numberField({ name: "half width", unit: "mm", id: "place-width", onCommit: () => {} });
  const count = numberField({ name: "positions", unit: "per axis", id: "place-count", onCommit: () => {} });
  const yaws = numberField({ name: "yaws", unit: "", id: "place-yaws", onCommit: () => {} });
  width.input.value = "600";
  count.input.value = "9";
  yaws.input.value = "4";
  const run = element("button", { text: "Search", attributes: { type: "button", id: "place-run" } });
  const bar = element("progress", { attributes: { id: "place-progress", max: "1", value: "0" } });
  const cancel = element("button", { text: "Cancel", attributes: { type: "button", id: "place-cancel" } });
  const progress = element("span", { className: "pb-controls" }, [bar, cancel]);
  progress.hidden = true;
  const yawSelect = element("select", { attributes: { id: "place-yaw", "aria-label": "Yaw shown" } });
  const heightSelect = element("select", { attributes: { id: "place-height", "aria-label": "Pedestal height shown" } });
  const summary = element("p", { className: "pb-note", attributes: { id: "place-summary" } });
  const explained = element("p", { className: "pb-note", attributes: { id: "place-score-words" } });
  const speed = element("p", { className: "pb-note pb-note-warn", attributes: { id: "place-speed" } });
  const heatmap = element("div", { className: "pb-plot pb-plot-placement", attributes: { id: "place-heatmap" } });
  const list = element("ol", { className: "pb-candidates", attributes: { id: "place-candidates" } });
  container.append(
    element("div", { className: "pb-fields" }, [width.label, count.label, yaws.label]),
    element("div", { className: "pb-controls" }, [run, progress, element("label", { text: "yaw " }, [yawSelect]), element("label", { text: "height " }, [heightSelect])]),
    summary,
    explained,
    speed,
    heatmap,
    list,
  );
  heatmap.hidden = true;
  let job = null;
  let clickBound = false;
  let scoredEtag = null;

  run.addEventListener("click", async () => {
    if (job) {
      return;
    }
    const body = {
      half_width_mm: Number(width.input.value),
      count: Math.round(Number(count.input.value)),
      yaw_count: Math.round(Number(yaws.input.value)),
    };
    progress.hidden = false;
    bar.value = 0;
    summary.textContent = "Searching…";
    job = runJob({
      api,
      start: () => api.startPlacement(body),
      onProgress: (state) => {
        bar.value = state.total ? state.done / state.total : 0;
      },
    });
    try {
      const finished = await job.done;
      if (finished.state === "done") {
        scoredEtag = store.get().cell ? store.get().cell.etag : null;
        store.update({ placement: finished.result });
      } else {
        summary.textContent = finished.state === "cancelled" ? "Search cancelled." : `Search failed: ${finished.detail}`;
      }
    } catch (error) {
      summary.textContent = `Search failed: ${error.message}`;
    } finally {
      job = null;
      progress.hidden = true;
    }
  });
  cancel.addEventListener("click", () => job && job.cancel());

  function moveTo(x, y, yawDeg, heightMm) {
    const { cell } = store.get();
    const z = cell.cell.base.position_mm[2];
    const [roll, pitch] = cell.cell.base.rpy_deg;
    onMoveBase({ position_mm: [x, y, z], rpy_deg: [roll, pitch, yawDeg], pedestal_height_mm: heightMm });
  }

  function fillSelect(select, values, unit, withBest) {
    const key = values.join(",") + withBest;
    if (select.dataset.key === key) {
      return;
    }
    select.dataset.key = key;
    const options = values.map((value, index) => new Option(`${formatNumber(value)} ${unit}`, String(index)));
    select.replaceChildren(...(withBest ? [new Option("best of all", "-1")] : []), ...options);
  }

  function render() {
    const { placement, cell } = store.get();
    if (!placement) {
      return;
    }
    // the scores belong to the cell as it was: a moved base or fixture makes them out of date
    const stale = Boolean(cell && scoredEtag !== null && cell.etag !== scoredEtag);
    heatmap.dataset.stale = String(stale);
    const base = cell ? cell.scene.base.position_mm : null;
    const grid = placement.grid;
    fillSelect(yawSelect, grid.yaw_deg, "deg", true);
    fillSelect(heightSelect, grid.pedestal_height_mm, "mm", false);
    const yawIndex = Number(yawSelect.value);
    const heightIndex = Number(heightSelect.value || 0);
    summary.textContent =
      (stale ? "Out of date: the base or a fixture has moved since these scores; run the search again. " : "") +
      `${placement.candidates_evaluated} base poses scored for ${placement.targets.length} targets.`;
    explained.textContent =
      `${placement.score_words} Scores closer than ${formatNumber(placement.score_noise, { decimals: 3 })} ` +
      "(the typical change over one grid step) are ties.";
    speed.textContent = placement.speed_note;
    speed.hidden = !placement.speed_note;
    heatmap.hidden = false;
    const best = placement.best[0];
    Plotly.react(
      heatmap,
      [
        {
          type: "heatmap",
          x: grid.x_mm,
          y: grid.y_mm,
          z: scorePlane(grid, yawIndex, heightIndex),
          colorscale: "Viridis",
          colorbar: { title: { text: stale ? "score (out of date)" : "score (1 = every target)" }, thickness: 10 },
          opacity: stale ? 0.45 : 1,
          hovertemplate: "x %{x:.0f} mm<br>y %{y:.0f} mm<br>score %{z:.3f}<extra></extra>",
        },
        {
          type: "scatter",
          mode: "markers+text",
          x: placement.best.map((c) => c.x_mm),
          y: placement.best.map((c) => c.y_mm),
          text: placement.best.map((c) => String(c.rank)),
          // neighbouring ranks put their labels on different sides, so they do not overlap
          textposition: placement.best.map((c) => LABEL_SIDES[c.rank % LABEL_SIDES.length]),
          marker: { size: 9, symbol: "circle-open", color: palette.ink, line: { width: 2 } },
          hoverinfo: "skip",
          meta: { role: "candidates" },
        },
        {
          type: "scatter",
          mode: "markers",
          name: "current base",
          x: base ? [base[0]] : [],
          y: base ? [base[1]] : [],
          marker: { size: 14, symbol: "x-thin-open", color: palette.bad, line: { width: 3 } },
          hovertemplate: "current base<extra></extra>",
          meta: { role: "current-base" },
        },
      ],
      {
        margin: { l: 56, r: 10, t: 8, b: 40 },
        xaxis: { title: { text: "base x (mm)" } },
        yaxis: { title: { text: "base y (mm)" }, scaleanchor: "x" },
        font: { family: "DejaVu Sans, Liberation Sans, sans-serif", size: 11 },
        paper_bgcolor: "rgba(0,0,0,0)",
        annotations: best ? [] : [{ text: "no candidate reaches a target", showarrow: false }],
      },
      PLOT_CONFIG,
    );
    if (!clickBound) {
      clickBound = true;
      heatmap.on("plotly_click", (event) => {
        const point = event.points.find((p) => p.data.type === "heatmap");
        if (!point) {
          return;
        }
        const { placement: current } = store.get();
        const g = current.grid;
        const yi = g.y_mm.indexOf(point.y);
        const xi = g.x_mm.indexOf(point.x);
        const hi = Number(heightSelect.value || 0);
        let yi2 = Number(yawSelect.value);
        if (yi2 < 0) {
          const perYaw = g.score[yi][xi].map((values) => values[hi]);
          yi2 = perYaw.indexOf(Math.max(...perYaw));
        }
        moveTo(point.x, point.y, g.yaw_deg[yi2], g.pedestal_height_mm[hi]);
      });
    }
    list.replaceChildren(
      ...placement.best.map((candidate) => {
        const tied = candidate.tie_rank > 0 && candidate.tie_rank !== candidate.rank;
        const current = placement.current_cycle_time_s;
        const slower = candidate.cycle_time_s !== null && current !== null && candidate.cycle_time_s > current;
        const item = element("li", { attributes: { tabindex: "0", "data-rank": String(candidate.rank), "data-tie-rank": String(candidate.tie_rank), "data-edits-cell": "", title: "Move the base here" } }, [
          `x ${formatNumber(candidate.x_mm, { decimals: 0 })}, y ${formatNumber(candidate.y_mm, { decimals: 0 })} mm, yaw ${formatNumber(candidate.yaw_deg, { decimals: 0 })} deg: `,
          element("strong", { text: `score ${formatNumber(candidate.score, { decimals: 3 })}` }),
          tied ? ` (a tie with rank ${candidate.tie_rank})` : "",
          ` — reaches ${candidate.targets_reached} of ${placement.targets.length} targets on ${candidate.branch || "no branch"}`,
          candidate.cycle_time_s === null ? "" : `, cycle ${formatNumber(candidate.cycle_time_s, { decimals: 2 })} s rest to rest`,
          candidate.blended_cycle_time_s == null ? "" : `, ${formatNumber(candidate.blended_cycle_time_s, { decimals: 2 })} s blended`,
          slower ? ` (slower than the current base's ${formatNumber(current, { decimals: 2 })} s)` : "",
        ]);
        const choose = () => moveTo(candidate.x_mm, candidate.y_mm, candidate.yaw_deg, candidate.pedestal_height_mm);
        item.addEventListener("click", choose);
        item.addEventListener("keydown", (event) => {
          if (event.key === "Enter") {
            choose();
          }
        });
        return item;
      }),
    );
  }

  yawSelect.addEventListener("change", render);
  heightSelect.addEventListener("change", render);
  store.subscribe(render, { keys: ["placement", "cell"] });
  return { render };
}
