// Redraw scheduling: at most one redraw per display frame, and optionally no
// more often than a minimum interval, so heavy views (3D) do not hold up the
// light ones while the user drags.

/**
 * Returns `request()`: calls `render()` on an animation frame, at most once per
 * frame and no sooner than `minIntervalMs` after the previous call; the last
 * request is always honoured. `minIntervalMs` may be a function, read each
 * time. While `hold()` is true nothing is drawn; the next `request()` after it
 * turns false draws (views on hold ask again when the hold ends).
 */
export function frameScheduler({ render, minIntervalMs = 0, hold = () => false }) {
  const interval = typeof minIntervalMs === "function" ? minIntervalMs : () => minIntervalMs;
  let scheduled = false;
  let lastRenderAt = -Infinity;

  function run() {
    if (hold()) {
      scheduled = false;
      return;
    }
    const wait = lastRenderAt + interval() - performance.now();
    if (wait > 0) {
      setTimeout(() => requestAnimationFrame(run), wait);
      return;
    }
    scheduled = false;
    lastRenderAt = performance.now();
    render();
  }

  return function request() {
    if (scheduled) {
      return;
    }
    scheduled = true;
    requestAnimationFrame(run);
  };
}

/**
 * Whether the page has its kinematics answers for the current joints (and
 * target): the heavy 3D views wait for this, so their first WebGL draw does
 * not hold up the requests and the light views on load.
 */
export function kinematicsSettled({ robot, fk, fkJoints, joints }) {
  return Boolean(robot && fk && fkJoints === joints);
}
