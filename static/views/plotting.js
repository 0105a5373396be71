// Shared plotly helpers for the views: figure defaults, the 2D and 3D layouts,
// and the conversion between mouse position and data coordinates used by dragging.

/* global Plotly */

export const PLOT_CONFIG = Object.freeze({
  displayModeBar: false,
  responsive: true,
  scrollZoom: false,
  doubleClick: false,
});

const FONT = { family: "DejaVu Sans, Liberation Sans, sans-serif", size: 12 };

/** Layout of a 2D view with fixed ranges; plotly's own zoom and pan are off. */
export function layout2d({ xTitle, yTitle, xRange, yRange, equalAspect = false, palette }) {
  const axis = (title, range) => ({
    title: { text: title, standoff: 4 },
    range,
    fixedrange: true,
    zeroline: true,
    zerolinecolor: palette.rule,
    gridcolor: "#eceff2",
    linecolor: palette.rule,
    ticks: "outside",
    ticklen: 3,
    mirror: true,
  });
  const yaxis = axis(yTitle, yRange);
  if (equalAspect) {
    // equal scale on both axes; plotly widens the shorter range to fill the plot area
    yaxis.scaleanchor = "x";
    yaxis.scaleratio = 1;
  }
  const xaxis = axis(xTitle, xRange);
  return {
    margin: { l: 58, r: 12, t: 10, b: 42 },
    xaxis,
    yaxis,
    dragmode: false,
    hovermode: false,
    showlegend: false,
    font: FONT,
    paper_bgcolor: "rgba(0,0,0,0)",
    plot_bgcolor: "#fbfcfd",
  };
}

/** An axis of a 3D view: title, fixed range, light panes, no spike lines. */
export function axis3d(title, range) {
  return {
    title: { text: title },
    range,
    backgroundcolor: "#f7f9fa",
    gridcolor: "#dde3e8",
    showspikes: false,
  };
}

/**
 * Layout of a 3D view filling its figure: a cube-shaped scene with the given
 * axes and camera. `revision` keeps the user's camera across redraws until it changes.
 */
export function layout3d({ axes: [xaxis, yaxis, zaxis], camera, revision }) {
  return {
    margin: { l: 0, r: 0, t: 0, b: 0 },
    showlegend: false,
    paper_bgcolor: "rgba(0,0,0,0)",
    font: { ...FONT, size: 11 },
    uirevision: revision,
    scene: { xaxis, yaxis, zaxis, aspectmode: "cube", camera, uirevision: revision },
  };
}

/** The plot-area rectangle of a 2D figure, in client pixels. */
function plotArea(figure) {
  const cover = figure.querySelector(".nsewdrag");
  if (cover) {
    return cover.getBoundingClientRect();
  }
  const size = figure._fullLayout._size;
  const box = figure.getBoundingClientRect();
  return { left: box.left + size.l, top: box.top + size.t, width: size.w, height: size.h };
}

function ranges(figure) {
  const full = figure._fullLayout;
  return { x: full.xaxis.range, y: full.yaxis.range };
}

/**
 * Data coordinates under a pointer event, and whether it is inside the plot area.
 * @returns {{x: number, y: number, inside: boolean}}
 */
export function dataFromPointer(figure, event) {
  const area = plotArea(figure);
  const { x: xr, y: yr } = ranges(figure);
  const u = (event.clientX - area.left) / area.width;
  const v = (event.clientY - area.top) / area.height;
  return {
    x: xr[0] + u * (xr[1] - xr[0]),
    y: yr[1] + v * (yr[0] - yr[1]),
    inside: u >= 0 && u <= 1 && v >= 0 && v <= 1,
  };
}

/** Client pixel position of a data point. */
export function pointerFromData(figure, x, y) {
  const area = plotArea(figure);
  const { x: xr, y: yr } = ranges(figure);
  return {
    clientX: area.left + ((x - xr[0]) / (xr[1] - xr[0])) * area.width,
    clientY: area.top + ((yr[1] - y) / (yr[1] - yr[0])) * area.height,
  };
}

/**
 * Pointer dragging on a 2D figure.
 *
 * `onPress(point, event)` decides whether a press starts a drag (return true);
 * `onMove(point, event)` follows the pointer while pressed; `onRelease()` ends it.
 * `onDragging(active)` is told when a drag starts and ends. Points are data
 * coordinates from dataFromPointer.
 */
export function attachDrag({ figure, onPress, onMove, onRelease = () => {}, onDragging = () => {} }) {
  let dragging = false;
  figure.addEventListener(
    "pointerdown",
    (event) => {
      if (event.button !== 0 || !figure._fullLayout) {
        return;
      }
      const point = dataFromPointer(figure, event);
      if (!point.inside || !onPress(point, event)) {
        return;
      }
      dragging = true;
      onDragging(true);
      figure.setPointerCapture(event.pointerId);
      event.preventDefault();
      event.stopPropagation();
    },
    { capture: true },
  );
  figure.addEventListener(
    "pointermove",
    (event) => {
      if (dragging) {
        onMove(dataFromPointer(figure, event), event);
        event.stopPropagation();
      }
    },
    { capture: true },
  );
  const end = (event) => {
    if (dragging) {
      dragging = false;
      figure.releasePointerCapture(event.pointerId);
      onRelease();
      onDragging(false);
    }
  };
  figure.addEventListener("pointerup", end, { capture: true });
  figure.addEventListener("pointercancel", end, { capture: true });
}

/**
 * Layout of the light top figure of a layered 2D view: the same plot area,
 * ranges and aspect as the base figure under it, but transparent and without
 * axes, grid or titles, so only its few moving traces are drawn. Restyling
 * them then redraws nothing of the base (whose regions and outlines are
 * costly to draw).
 */
export function topLayout(layout) {
  const bare = (axis) => ({
    ...axis,
    title: { text: "" },
    showgrid: false,
    zeroline: false,
    showline: false,
    showticklabels: false,
    ticks: "",
    mirror: false,
  });
  return {
    ...layout,
    xaxis: bare(layout.xaxis),
    yaxis: bare(layout.yaxis),
    shapes: [],
    annotations: [],
    paper_bgcolor: "rgba(0,0,0,0)",
    plot_bgcolor: "rgba(0,0,0,0)",
  };
}

/**
 * A plotly layout image covering the cells of a regular grid: `picture` (a data: URL) has one
 * pixel per cell, columns along `xs` and its top row at the last of `ys` (cell centres), and is
 * stretched over the cells' extent under the traces (style.css keeps its pixels crisp).
 */
export function gridImage(picture, xs, ys, extra = {}) {
  const step = (values) => (values.length > 1 ? (values[values.length - 1] - values[0]) / (values.length - 1) : 1);
  const [dx, dy] = [step(xs), step(ys)];
  return {
    source: picture,
    xref: "x",
    yref: "y",
    x: xs[0] - dx / 2,
    y: ys[ys.length - 1] + dy / 2,
    sizex: xs[xs.length - 1] - xs[0] + dx,
    sizey: ys[ys.length - 1] - ys[0] + dy,
    xanchor: "left",
    yanchor: "top",
    sizing: "stretch",
    layer: "below",
    ...extra,
  };
}

/** Draw or redraw a figure (plotly diffing keeps it cheap). */
export function draw(figure, data, layout) {
  followSize(figure);
  return Plotly.react(figure, data, layout, PLOT_CONFIG);
}

const followed = new WeakSet();

/**
 * Resize a figure with its box, not only with the window (plotly's
 * `responsive`): the workbench's views share the screen, and a progress row or
 * a legend appearing in a card changes a plot's height. One resize per frame.
 */
function followSize(figure) {
  if (followed.has(figure) || typeof ResizeObserver === "undefined") {
    return;
  }
  followed.add(figure);
  let size = null;
  let pending = false;
  new ResizeObserver(([entry]) => {
    const next = `${Math.round(entry.contentRect.width)}x${Math.round(entry.contentRect.height)}`;
    if (next === size || pending) {
      size = next;
      return;
    }
    const first = size === null;
    size = next;
    if (first) {
      return;
    }
    pending = true;
    requestAnimationFrame(() => {
      pending = false;
      if (figure.data) {
        Plotly.Plots.resize(figure);
      }
    });
  }).observe(figure);
}
