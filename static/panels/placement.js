// Placement panel: search base poses around the current one (a server job with
// progress and cancel), show the score over the x–y grid for a chosen yaw and
// pedestal height (or the best over all yaws; a picture the server draws, under
// the candidates and the current base), and the ranked candidates. The
// score is explained in words, candidates within the score's noise are shown
// as ties, and a best candidate slower than the current base is said so.
// Clicking a candidate or a grid cell moves the robot's base there: the cell
// is edited and saved, and both halves follow. The candidates carry
// `data-edits-cell` (review.js disables them for reviewers; the search itself
// changes nothing and stays open to them).
// For a cell with a track the server searches the rail's line instead (report
// `search: "rail"`): the heatmap is the score over offset x yaw, and a
// candidate applies its rail (origin, direction, a travel covering the needed one).
// A turntable cell without a track searches the table's position (report `search:
// "table"`; or chosen in the search select): the heatmap is the score over the table's
// (x, y) with the current table marked, and a candidate or a grid cell moves the table there.

/* global Plotly */

import { runJob } from "../api.js";
import { element, numberField } from "./fields.js";
import { PLOT_CONFIG, attachDrag, dataFromPointer, gridImage } from "../views/plotting.js";
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

/** The score over yaw (rows) x rail offset (columns) of a rail search's grid. */
export function railPlane(grid) {
  return grid.yaw_deg.map((_, yawIndex) => grid.x_mm.map((__, offsetIndex) => grid.score[0][offsetIndex][yawIndex][0]));
}

/** The current position of the turntable called `name` in the cell, or null. */
function tablePosition(cell, name) {
  const table = cell && cell.cell.turntables ? cell.cell.turntables.find((t) => t.name === name) : null;
  return table ? table.position_mm : null;
}

/** Direction of travel of a track about world z, degrees. */
function trackYawDeg(track) {
  return (Math.atan2(track.direction[1], track.direction[0]) * 180) / Math.PI;
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object, palette: object,
 *          onMoveBase: (edit: object) => Promise<void>, onMoveRail: (rail: object) => Promise<void>,
 *          onMoveTable: (table: {name: string, position_mm: number[]}) => Promise<void>}} options
 */
export function createPlacementPanel({ container, store, actions, api, palette, onMoveBase, onMoveRail, onMoveTable }) {
  const width = numberField({ name: "half width", unit: "mm", id: "place-width", onCommit: () => {} });
  const count = numberField({ name: "positions", unit: "per axis", id: "place-count", onCommit: () => {} });
  const yaws = numberField({ name: "yaws", unit: "", id: "place-yaws", onCommit: () => {} });
  width.input.value = "600";
  count.input.value = "9";
  yaws.input.value = "4";
  const mode = element("select", { attributes: { id: "place-search", "aria-label": "What to move" } });
  mode.replaceChildren(
    new Option("automatic", "auto"),
    new Option("robot base", "base"),
    new Option("rail line", "rail"),
    new Option("turntable", "table"),
  );
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
    element("div", { className: "pb-fields" }, [width.label, count.label, yaws.label, element("label", { text: "move " }, [mode])]),
    element("div", { className: "pb-controls" }, [run, progress, element("label", { text: "yaw " }, [yawSelect]), element("label", { text: "height " }, [heightSelect])]),
    summary,
    explained,
    speed,
    heatmap,
    list,
  );
  heatmap.hidden = true;
  let job = null;
  let scoredEtag = null;
  let scoredJob = null; // the finished search's job id: its score pictures come from there
  const pictures = new Map(); // "job|yaw|height" -> data: URL

  run.addEventListener("click", async () => {
    if (job) {
      return;
    }
    const body = {
      half_width_mm: Number(width.input.value),
      count: Math.round(Number(count.input.value)),
      yaw_count: Math.round(Number(yaws.input.value)),
      search: mode.value,
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
        scoredJob = finished.id;
        pictures.clear();
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
    const table = placement.search === "table";
    const base = table ? tablePosition(cell, placement.table_name) : cell ? cell.scene.base.position_mm : null;
    const grid = placement.grid;
    fillSelect(yawSelect, grid.yaw_deg, "deg", true);
    fillSelect(heightSelect, grid.pedestal_height_mm, "mm", false);
    const yawIndex = Number(yawSelect.value);
    const heightIndex = Number(heightSelect.value || 0);
    summary.textContent =
      (stale ? "Out of date: the base or a fixture has moved since these scores; run the search again. " : "") +
      `${placement.candidates_evaluated} ${table ? `positions of ${placement.table_name}` : "base poses"} scored for ${placement.targets.length} targets.`;
    explained.textContent =
      `${placement.score_words} Scores closer than ${formatNumber(placement.score_noise, { decimals: 3 })} ` +
      "(the typical change over one grid step) are ties.";
    speed.textContent = placement.speed_note;
    speed.hidden = !placement.speed_note;
    heatmap.hidden = false;
    const best = placement.best[0];
    const rail = placement.search === "rail";
    heatmap.dataset.search = placement.search || "base";
    yawSelect.parentElement.hidden = rail || table;
    heightSelect.parentElement.hidden = rail || table;
    if (rail) {
      renderRail(placement, cell, stale, best);
      return;
    }
    const plane = scorePlane(grid, yawIndex, heightIndex);
    const finite = plane.flat().filter(Number.isFinite);
    const [low, high] = finite.length ? [Math.min(...finite), Math.max(...finite)] : [0, 1];
    const pictureKey = `${scoredJob}|${yawIndex}|${heightIndex}`;
    const picture = pictures.get(pictureKey);
    if (picture === undefined && scoredJob !== null) {
      pictures.set(pictureKey, null);
      api
        .jobPicture(scoredJob, { yaw_index: yawIndex, height_index: heightIndex })
        .then((url) => {
          pictures.set(pictureKey, url);
          render();
        })
        .catch((error) => {
          pictures.delete(pictureKey);
          summary.textContent = `The score picture could not be read (${error.message}); run the search again.`;
        });
    }
    heatmap.dataset.picture = picture ? pictureKey : "";
    // the axes span the grid's cells (a layout image does not widen the axes by itself)
    const extent = gridImage("", grid.x_mm, grid.y_mm);
    Plotly.react(
      heatmap,
      [
        {
          // the colour bar of the score picture (plotly's Viridis, as results/map_images.py draws it)
          type: "scatter",
          mode: "markers",
          x: [grid.x_mm[0], grid.x_mm[0]],
          y: [grid.y_mm[0], grid.y_mm[0]],
          marker: {
            color: [low, high],
            cmin: low,
            cmax: high === low ? low + 1e-9 : high,
            colorscale: "Viridis",
            opacity: 0,
            showscale: true,
            colorbar: { title: { text: stale ? "score (out of date)" : "score (1 = every target)", side: "right" }, thickness: 10 },
          },
          hoverinfo: "skip",
          showlegend: false,
          meta: { role: "score-scale" },
        },
        {
          type: "scatter",
          mode: "markers+text",
          name: "ranked candidates",
          x: placement.best.map((c) => c.x_mm),
          y: placement.best.map((c) => c.y_mm),
          text: placement.best.map((c) => String(c.rank)),
          // neighbouring ranks put their labels on different sides, so they do not overlap
          textposition: placement.best.map((c) => LABEL_SIDES[c.rank % LABEL_SIDES.length]),
          marker: { size: 9, symbol: "circle-open", color: palette.ink, line: { width: 2 } },
          name: "best candidates",
          hoverinfo: "skip",
          meta: { role: "candidates" },
        },
        {
          type: "scatter",
          mode: "markers",
          name: table ? "current table" : "current base",
          x: base ? [base[0]] : [],
          y: base ? [base[1]] : [],
          marker: { size: 14, symbol: "x-thin-open", color: palette.bad, line: { width: 3 } },
          hovertemplate: table ? "current table<extra></extra>" : "current base<extra></extra>",
          meta: { role: "current-base" },
        },
      ],
      {
        margin: { l: 56, r: 10, t: 28, b: 40 },
        legend: { orientation: "h", x: 0, xanchor: "left", y: 1, yanchor: "bottom" },
        xaxis: { title: { text: table ? "table x (mm)" : "base x (mm)" }, range: [extent.x, extent.x + extent.sizex], showgrid: false },
        yaxis: { title: { text: table ? "table y (mm)" : "base y (mm)" }, range: [extent.y - extent.sizey, extent.y], scaleanchor: "x", showgrid: false },
        font: { family: "DejaVu Sans, Liberation Sans, sans-serif", size: 11 },
        paper_bgcolor: "rgba(0,0,0,0)",
        dragmode: false,
        annotations: best ? [] : [{ text: "no candidate reaches a target", showarrow: false }],
        images: picture ? [gridImage(picture, grid.x_mm, grid.y_mm, { name: "score", opacity: stale ? 0.45 : 1 })] : [],
      },
      PLOT_CONFIG,
    );
    list.replaceChildren(
      ...placement.best.map((candidate) => {
        const tied = candidate.tie_rank > 0 && candidate.tie_rank !== candidate.rank;
        const current = placement.current_cycle_time_s;
        const slower = candidate.cycle_time_s !== null && current !== null && candidate.cycle_time_s > current;
        const item = element("li", { attributes: { tabindex: "0", "data-rank": String(candidate.rank), "data-tie-rank": String(candidate.tie_rank), "data-edits-cell": "", title: table ? "Move the table here" : "Move the base here" } }, [
          table
            ? `table at x ${formatNumber(candidate.x_mm, { decimals: 0 })}, y ${formatNumber(candidate.y_mm, { decimals: 0 })} mm: `
            : `x ${formatNumber(candidate.x_mm, { decimals: 0 })}, y ${formatNumber(candidate.y_mm, { decimals: 0 })} mm, yaw ${formatNumber(candidate.yaw_deg, { decimals: 0 })} deg: `,
          element("strong", { text: `score ${formatNumber(candidate.score, { decimals: 3 })}` }),
          tied ? ` (a tie with rank ${candidate.tie_rank})` : "",
          ` — reaches ${candidate.targets_reached} of ${placement.targets.length} targets on ${candidate.branch || "no branch"}`,
          candidate.cycle_time_s === null ? "" : `, cycle ${formatNumber(candidate.cycle_time_s, { decimals: 2 })} s rest to rest`,
          candidate.blended_cycle_time_s == null ? "" : `, ${formatNumber(candidate.blended_cycle_time_s, { decimals: 2 })} s blended`,
          slower ? ` (slower than the current ${table ? "table" : "base"}'s ${formatNumber(current, { decimals: 2 })} s)` : "",
          table && candidate.table ? tableAngles(candidate.table) : "",
        ]);
        const choose = table && candidate.table
          ? () => onMoveTable({ name: candidate.table.name, position_mm: candidate.table.position_mm })
          : () => moveTo(candidate.x_mm, candidate.y_mm, candidate.yaw_deg, candidate.pedestal_height_mm);
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

  /** The table angles a table candidate's targets use, beside the configured range. */
  function tableAngles(table) {
    const [low, high] = table.angle_range_deg;
    const range = `${formatNumber(low, { decimals: 0 })}…${formatNumber(high, { decimals: 0 })} deg`;
    if (!table.angle_span_deg) {
      return `; no target on the table reached (range ${range})`;
    }
    const [first, last] = table.angle_span_deg;
    return `; table angles ${formatNumber(first, { decimals: 0 })}…${formatNumber(last, { decimals: 0 })} deg of its range ${range}`;
  }

  /** The grid cell under a pointer event: its indices and centre, or null outside the grid. */
  function cellAt(event) {
    const { placement } = store.get();
    if (!placement || placement.search === "rail" || !heatmap._fullLayout) {
      return null;
    }
    const point = dataFromPointer(heatmap, event);
    const g = placement.grid;
    const nearest = (values, v) => values.reduce((best, value, k) => (Math.abs(value - v) < Math.abs(values[best] - v) ? k : best), 0);
    const step = (values) => (values.length > 1 ? Math.abs(values[1] - values[0]) : Infinity);
    const xi = nearest(g.x_mm, point.x);
    const yi = nearest(g.y_mm, point.y);
    const inside = point.inside && Math.abs(g.x_mm[xi] - point.x) <= step(g.x_mm) / 2 && Math.abs(g.y_mm[yi] - point.y) <= step(g.y_mm) / 2;
    return inside ? { xi, yi, grid: g } : null;
  }

  // pressing on a grid cell moves the base there (the best yaw of that cell when all are shown)
  attachDrag({
    figure: heatmap,
    onPress: (_point, event) => {
      const cell = cellAt(event);
      if (!cell) {
        return false;
      }
      const { xi, yi, grid: g } = cell;
      const { placement, cell: current } = store.get();
      if (placement.search === "table") {
        const at = tablePosition(current, placement.table_name);
        if (at) {
          onMoveTable({ name: placement.table_name, position_mm: [g.x_mm[xi], g.y_mm[yi], at[2]] });
        }
        return false;
      }
      const hi = Number(heightSelect.value || 0);
      let yaw = Number(yawSelect.value);
      if (yaw < 0) {
        const perYaw = g.score[yi][xi].map((values) => values[hi]);
        yaw = perYaw.indexOf(Math.max(...perYaw));
      }
      moveTo(g.x_mm[xi], g.y_mm[yi], g.yaw_deg[yaw], g.pedestal_height_mm[hi]);
      return false;
    },
    onMove: () => {},
  });
  // hovering a cell says its position and score
  heatmap.addEventListener("mousemove", (event) => {
    const cell = cellAt(event);
    if (!cell) {
      heatmap.title = "";
      return;
    }
    const { xi, yi, grid: g } = cell;
    const score = scorePlane(g, Number(yawSelect.value), Number(heightSelect.value || 0))[yi][xi];
    const what = store.get().placement.search === "table" ? "table " : "";
    heatmap.title = `${what}x ${formatNumber(g.x_mm[xi], { decimals: 0 })} mm, y ${formatNumber(g.y_mm[yi], { decimals: 0 })} mm: score ${formatNumber(score, { decimals: 3 })}`;
  });

  /** The rail search's heatmap (offset x yaw) and its candidates; a candidate applies its rail. */
  function renderRail(placement, cell, stale, best) {
    const grid = placement.grid;
    const track = cell && cell.cell.track ? cell.cell.track : null;
    const ranked = placement.best.filter((c) => c.rail);
    Plotly.react(
      heatmap,
      [
        {
          // one square marker per rail line, coloured by its score (the page's plotly bundle has
          // no heatmap trace; the base search's picture comes from the server)
          type: "scatter",
          mode: "markers",
          name: "rail lines",
          x: grid.yaw_deg.flatMap(() => grid.x_mm),
          y: grid.yaw_deg.flatMap((yaw) => grid.x_mm.map(() => yaw)),
          marker: {
            symbol: "square",
            size: 16,
            color: railPlane(grid).flat(),
            colorscale: "Viridis",
            showscale: true,
            colorbar: { title: { text: stale ? "score (out of date)" : "score (1 = every target)", side: "right" }, thickness: 10 },
            opacity: stale ? 0.45 : 1,
          },
          hovertemplate: "offset %{x:.0f} mm<br>yaw %{y:.0f} deg<br>score %{marker.color:.3f}<extra></extra>",
          meta: { role: "rail-scores" },
        },
        {
          type: "scatter",
          mode: "markers+text",
          name: "best candidates",
          x: ranked.map((c) => c.rail.offset_mm),
          y: ranked.map((c) => c.rail.yaw_deg),
          text: ranked.map((c) => String(c.rank)),
          textposition: ranked.map((c) => LABEL_SIDES[c.rank % LABEL_SIDES.length]),
          marker: { size: 9, symbol: "circle-open", color: palette.ink, line: { width: 2 } },
          hoverinfo: "skip",
          meta: { role: "candidates" },
        },
        {
          type: "scatter",
          mode: "markers",
          name: "current rail",
          x: track && !stale ? [0] : [],
          y: track && !stale ? [trackYawDeg(track)] : [],
          marker: { size: 14, symbol: "x-thin-open", color: palette.bad, line: { width: 3 } },
          hovertemplate: "current rail<extra></extra>",
          meta: { role: "current-base" },
        },
      ],
      {
        margin: { l: 56, r: 10, t: 28, b: 40 },
        legend: { orientation: "h", x: 0, xanchor: "left", y: 1, yanchor: "bottom" },
        xaxis: { title: { text: "rail offset across the travel (mm)" } },
        yaxis: { title: { text: "direction of travel (deg)" } },
        font: { family: "DejaVu Sans, Liberation Sans, sans-serif", size: 11 },
        paper_bgcolor: "rgba(0,0,0,0)",
        annotations: best ? [] : [{ text: "no candidate reaches a target", showarrow: false }],
      },
      PLOT_CONFIG,
    );
    list.replaceChildren(
      ...ranked.map((candidate) => {
        const { rail } = candidate;
        const needed = rail.travel_needed_mm;
        const item = element("li", { attributes: { tabindex: "0", "data-rank": String(candidate.rank), "data-tie-rank": String(candidate.tie_rank), "data-edits-cell": "", title: "Put the rail here" } }, [
          `offset ${formatNumber(rail.offset_mm, { decimals: 0 })} mm, yaw ${formatNumber(rail.yaw_deg, { decimals: 0 })} deg: `,
          element("strong", { text: `score ${formatNumber(candidate.score, { decimals: 3 })}` }),
          ` — reaches ${candidate.targets_reached} of ${placement.targets.length} targets on ${candidate.branch || "no branch"}`,
          needed
            ? `, travel needed ${formatNumber(needed[0], { decimals: 0 })}…${formatNumber(needed[1], { decimals: 0 })} mm` +
              (rail.fits ? " (fits the configured travel)" : ` (configured ${formatNumber(rail.travel_configured_mm[0], { decimals: 0 })}…${formatNumber(rail.travel_configured_mm[1], { decimals: 0 })} mm)`)
            : "",
        ]);
        const choose = () => onMoveRail(rail);
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
