// The only module that talks to the server. Every call checks response.ok and
// turns an error answer into an ApiError carrying the server's "detail" text.

/**
 * An answer with an error status; `detail` is the server's message and
 * `retryAfterS` the seconds its Retry-After header asks to wait (null without one).
 */
export class ApiError extends Error {
  constructor({ status, detail, path, retryAfterS = null }) {
    super(detail);
    this.name = "ApiError";
    this.status = status;
    this.detail = detail;
    this.path = path;
    this.retryAfterS = retryAfterS;
  }
}

/**
 * Seconds to wait from a Retry-After header value (RFC 9110 sec. 10.2.3: a
 * number of seconds or an HTTP date), or null when there is none or it cannot be read.
 */
export function retryAfterSeconds(value, nowMs = Date.now()) {
  if (value === null || value === undefined || String(value).trim() === "") {
    return null;
  }
  const text = String(value).trim();
  if (/^\d+$/.test(text)) {
    return Number(text);
  }
  const at = Date.parse(text);
  return Number.isFinite(at) ? Math.max(0, (at - nowMs) / 1000) : null;
}

/** Whether an error is the server's "too many requests" answer (HTTP 429). */
export function isRateLimited(error) {
  return error instanceof ApiError && error.status === 429;
}

/** How long to wait after a 429: its Retry-After, at least one second. */
export function retryDelayMs(error) {
  return 1000 * Math.max(1, error.retryAfterS ?? 1);
}

const sleep = (ms) => new Promise((resolve) => setTimeout(resolve, ms));

/**
 * Client of the posebridge HTTP API.
 * @param {{baseUrl?: string}} options
 */
/** A blob as a data: URL (read once; the picture then needs no request of its own when drawn again). */
function dataUrl(blob) {
  return new Promise((resolve, reject) => {
    const reader = new FileReader();
    reader.addEventListener("load", () => resolve(reader.result));
    reader.addEventListener("error", () => reject(reader.error));
    reader.readAsDataURL(blob);
  });
}

export function createApiClient({ baseUrl = "" } = {}) {
  async function request(path, { method = "GET", body = undefined, signal = undefined, ifMatch = undefined, picture = false } = {}) {
    const headers = {};
    if (body !== undefined) {
      headers["content-type"] = "application/json";
    }
    if (ifMatch !== undefined) {
      headers["if-match"] = `"${ifMatch}"`;
    }
    let response;
    try {
      response = await fetch(baseUrl + path, { method, headers, body: body === undefined ? undefined : JSON.stringify(body), signal });
    } catch (error) {
      if (error.name === "AbortError") {
        throw error;
      }
      throw new ApiError({ status: 0, detail: `server not reachable (${error.message})`, path });
    }
    if (picture && response.ok) {
      return dataUrl(await response.blob());
    }
    let payload = null;
    try {
      payload = await response.json();
    } catch {
      payload = null;
    }
    if (!response.ok) {
      const detail =
        payload && typeof payload.detail === "string"
          ? payload.detail
          : `${response.status} ${response.statusText}`.trim();
      const retryAfterS = retryAfterSeconds(response.headers.get("retry-after"));
      throw new ApiError({ status: response.status, detail, path, retryAfterS });
    }
    return payload;
  }

  return {
    health: () => request("/api/health"),
    listRobots: () => request("/api/robots"),
    robotModel: (robot) => request(`/api/robots/model?robot=${encodeURIComponent(robot)}`),
    robotMeshes: (robot) => request(`/api/robots/meshes?robot=${encodeURIComponent(robot)}`),
    fk: (body, { signal } = {}) => request("/api/fk", { method: "POST", body, signal }),
    ik: (body, { signal } = {}) => request("/api/ik", { method: "POST", body, signal }),
    readCell: () => request("/api/cell"),
    replaceCell: (cell, etag) => request("/api/cell", { method: "PUT", body: cell, ifMatch: etag }),
    readChainChoice: () => request("/api/cell/chain-choice"),
    chooseChainEnd: (toLink, etag) =>
      request("/api/cell/chain-choice", { method: "PUT", body: { to_link: toLink }, ifMatch: etag }),
    moveTarget: (name, body, etag) =>
      request(`/api/cell/targets/${encodeURIComponent(name)}`, { method: "PATCH", body, ifMatch: etag }),
    moveFixture: (name, body, etag) =>
      request(`/api/cell/fixtures/${encodeURIComponent(name)}`, { method: "PATCH", body, ifMatch: etag }),
    moveWaypoint: (path, index, body, etag) =>
      request(`/api/cell/paths/${encodeURIComponent(path)}/waypoints/${index}`, { method: "PATCH", body, ifMatch: etag }),
    moveBase: (body, etag) => request("/api/cell/base", { method: "PATCH", body, ifMatch: etag }),
    moveTurntable: (name, body, etag) =>
      request(`/api/cell/turntables/${encodeURIComponent(name)}`, { method: "PATCH", body, ifMatch: etag }),
    moveTrack: (body, etag) => request("/api/cell/track", { method: "PATCH", body, ifMatch: etag }),
    meshDrawing: (name, maxTriangles = null) =>
      request(`/api/cell/meshes/${encodeURIComponent(name)}${maxTriangles ? `?max_triangles=${maxTriangles}` : ""}`),
    uploadMesh: (body, etag) => request("/api/cell/meshes", { method: "POST", body, ifMatch: etag }),
    startJointMap: (body) => request("/api/maps/joint", { method: "POST", body }),
    startReachSection: (body) => request("/api/maps/reach-section", { method: "POST", body }),
    targetCheck: () => request("/api/cell/check"),
    pathCheck: (name) => request(`/api/cell/paths/${encodeURIComponent(name)}/check`),
    armState: (body, { signal } = {}) => request("/api/cell/fk", { method: "POST", body, signal }),
    pathSequence: (name) => request(`/api/cell/paths/${encodeURIComponent(name)}/sequence`),
    setWaypointJoints: (name, edits, etag) =>
      request(`/api/cell/paths/${encodeURIComponent(name)}/waypoints`, { method: "PATCH", body: { edits }, ifMatch: etag }),
    diagnosePose: (joints) => request("/api/cell/diagnose/pose", { method: "POST", body: { joints_deg: joints } }),
    diagnoseLog: (csv, source) => request("/api/cell/diagnose/log", { method: "POST", body: { csv, source } }),
    startPlacement: (body) => request("/api/placement", { method: "POST", body }),
    readJob: (id, { signal } = {}) => request(`/api/jobs/${encodeURIComponent(id)}`, { signal }),
    cancelJob: (id) => request(`/api/jobs/${encodeURIComponent(id)}/cancel`, { method: "POST" }),
    // the PNG of a finished grid result as a data: URL (a plotly layout image's source)
    jobPicture: (id, query = {}) => {
      const search = new URLSearchParams(Object.entries(query).map(([key, value]) => [key, String(value)])).toString();
      return request(`/api/jobs/${encodeURIComponent(id)}/image${search ? `?${search}` : ""}`, { picture: true });
    },
    reviewAccess: () => request("/api/reviews/access"),
    leaveReview: () => request("/api/reviews/session", { method: "DELETE" }),
    listComments: () => request("/api/reviews/comments"),
    addComment: (body) => request("/api/reviews/comments", { method: "POST", body }),
    resolveComment: (id, resolved) =>
      request(`/api/reviews/comments/${encodeURIComponent(id)}`, { method: "PATCH", body: { resolved } }),
  };
}

/**
 * Latest-only request channel for interactive edits (drags, sliders).
 *
 * At most one request is in flight; edits arriving meanwhile replace each
 * other, and only the newest is sent when the current one returns, no sooner
 * than `minIntervalMs` after the previous send (about one display frame;
 * a function is read at each send, so the interval can follow the page's state).
 * Every request carries a sequence number: an answer older than one already
 * applied is dropped, and `cancel()` aborts the request in flight.
 *
 * @param {{send: Function, onResult: Function, onError: Function, minIntervalMs?: number}} options
 */
export function createLatestChannel({ send, onResult, onError, minIntervalMs = 16 }) {
  let sequence = 0;
  let applied = 0;
  let pending = null;
  let inFlight = null;
  let timer = null;
  let lastSentAt = -Infinity;

  function request(payload, meta = {}) {
    sequence += 1;
    pending = { payload, meta, sequence };
    schedule();
    return sequence;
  }

  function schedule() {
    if (inFlight || timer !== null || pending === null) {
      return;
    }
    const interval = typeof minIntervalMs === "function" ? minIntervalMs() : minIntervalMs;
    const wait = lastSentAt + interval - performance.now();
    if (wait > 0) {
      timer = setTimeout(() => {
        timer = null;
        schedule();
      }, wait);
      return;
    }
    flush();
  }

  async function flush() {
    const job = pending;
    pending = null;
    const controller = new AbortController();
    inFlight = controller;
    lastSentAt = performance.now();
    try {
      const result = await send(job.payload, { signal: controller.signal });
      if (!controller.signal.aborted && job.sequence > applied) {
        applied = job.sequence;
        onResult(result, job.meta, job.payload);
      }
    } catch (error) {
      if (error.name !== "AbortError" && job.sequence > applied) {
        applied = job.sequence;
        onError(error, job.meta, job.payload);
      }
    } finally {
      inFlight = null;
      schedule();
    }
  }

  function cancel() {
    pending = null;
    applied = sequence;
    if (timer !== null) {
      clearTimeout(timer);
      timer = null;
    }
    if (inFlight) {
      inFlight.abort();
    }
  }

  return { request, cancel };
}

/**
 * Run a server job to its end: poll its progress every `pollMs`, report it,
 * and resolve with the finished job (state done, failed or cancelled).
 * `cancel()` of the returned handle asks the server to stop the job.
 *
 * A start refused with 429 (rate or job caps) is tried once more after the
 * answer's Retry-After: `onWait({seconds, detail})` says so meanwhile, and a
 * second refusal is thrown. A poll refused with 429 waits its Retry-After and
 * polls again. A handle cancelled while waiting resolves with state cancelled.
 *
 * @param {{api: object, start: () => Promise<object>, onProgress?: Function, onWait?: Function,
 *          pollMs?: number}} options
 * @returns {{done: Promise<object>, cancel: () => void}}
 */
export function runJob({ api, start, onProgress = () => {}, onWait = () => {}, pollMs = 150 }) {
  let jobId = null;
  let stopped = false;
  const cancelledWhileWaiting = { id: null, state: "cancelled", done: 0, total: 0, detail: "cancelled while waiting" };

  async function startOnce() {
    try {
      return await start();
    } catch (error) {
      if (!isRateLimited(error)) {
        throw error;
      }
      const waitMs = retryDelayMs(error);
      onWait({ seconds: waitMs / 1000, detail: error.detail });
      await sleep(waitMs);
      return stopped ? null : start();
    }
  }

  async function poll() {
    try {
      return await api.readJob(jobId);
    } catch (error) {
      if (!isRateLimited(error)) {
        throw error;
      }
      await sleep(retryDelayMs(error));
      return poll();
    }
  }

  const done = (async () => {
    let job = await startOnce();
    if (job === null) {
      return cancelledWhileWaiting;
    }
    jobId = job.id;
    if (stopped) {
      job = await api.cancelJob(jobId);
    }
    onProgress(job);
    while (job.state === "queued" || job.state === "running") {
      await sleep(pollMs);
      job = await poll();
      onProgress(job);
    }
    return job;
  })();
  function cancel() {
    if (stopped) {
      return;
    }
    stopped = true;
    if (jobId !== null) {
      api.cancelJob(jobId).catch(() => {});
    }
  }
  return { done, cancel };
}
