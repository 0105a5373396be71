// The server's kernel loading, read from GET /api/health: "compiling kernels 2/3: …" in the
// status area until every kernel is loaded, then hidden. Owns the store key `kernels`.

/** Time between two health questions while kernels are still loading, ms. */
const POLL_MS = 1000;

/**
 * Ask the server how far its kernel loading is until it is done, keep the answer in the store
 * and show it in `element`.
 * @param {{api: object, store: object, element: HTMLElement}} options
 */
export function createKernelProgress({ api, store, element }) {
  function show(health) {
    const kernels = {
      ready: Boolean(health.kernels_ready),
      done: health.kernels_done,
      total: health.kernels_total,
      current: health.kernels_current,
    };
    store.update({ kernels });
    element.hidden = kernels.ready;
    element.textContent = kernels.ready
      ? ""
      : `compiling kernels ${Math.min(kernels.done + 1, kernels.total)}/${kernels.total}: ${kernels.current || "starting"}…`;
  }

  async function poll() {
    try {
      const health = await api.health();
      show(health);
      if (health.kernels_ready) {
        return;
      }
    } catch {
      // a failed question leaves the last answer shown; ask again
    }
    setTimeout(poll, POLL_MS);
  }

  poll();
}
