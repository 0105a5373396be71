// Coalesces redraw requests to at most one per display frame.

/** Returns `request()`: calls `render()` once on the next animation frame. */
export function frameScheduler({ render }) {
  let scheduled = false;
  return function request() {
    if (scheduled) {
      return;
    }
    scheduled = true;
    requestAnimationFrame(() => {
      scheduled = false;
      render();
    });
  };
}
