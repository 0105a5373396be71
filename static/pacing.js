// How a reviewer's page paces itself below the server's rate caps. The caps
// come from the server (GET /api/reviews/access, `reviewer_caps`, stored as
// `reviewerCaps` by review.js): token buckets per client address, `burst`
// requests at once, then `per_second`. The page takes fixed shares of them:
//
// - jobs it starts by itself (joint maps, reach sections; cap "heavy"): a
//   bucket of 3/4 of the burst refilled at 4/5 of the rate, so they wait here
//   instead of being refused there and the reviewer's own base placement
//   searches still find room;
// - kinematics while the target moves (cap "compute"): IK at 5/8 of the rate
//   and, during a drag, FK at 1/4 of it (7/8 together); FK alone at 5/8.
//
// Until the server has answered (or if it could not), the page assumes one
// start at a time every 10 s and kinematics at 4 per second.

const JOB_BURST_SHARE = 3 / 4;
const JOB_RATE_SHARE = 4 / 5;
const IK_RATE_SHARE = 5 / 8;
const FK_DRAGGING_RATE_SHARE = 1 / 4;
/** Caps assumed while the server's are unknown. */
const UNKNOWN_CAPS = Object.freeze({
  heavy: { burst: 1, per_second: 0.1 },
  compute: { burst: 1, per_second: 4 },
});

function capOf(caps, kind) {
  return (caps && caps[kind]) || UNKNOWN_CAPS[kind];
}

/**
 * The bucket of a reviewer's automatic job starts for the server's caps.
 *
 * @param {object | null} caps  `reviewer_caps` of the access answer, or null when unknown.
 * @returns {{burst: number, perSecond: number}}
 */
export function jobPacing(caps) {
  const heavy = capOf(caps, "heavy");
  return {
    burst: Math.max(1, Math.floor(JOB_BURST_SHARE * heavy.burst)),
    perSecond: JOB_RATE_SHARE * heavy.per_second,
  };
}

/**
 * Smallest intervals between a reviewer's kinematics requests for the server's caps.
 *
 * @param {object | null} caps  `reviewer_caps` of the access answer, or null when unknown.
 * @returns {{ikMs: number, fkMs: number, fkDraggingMs: number}}
 */
export function kinematicsPacing(caps) {
  const perSecond = capOf(caps, "compute").per_second;
  const ikMs = Math.ceil(1000 / (IK_RATE_SHARE * perSecond));
  return { ikMs, fkMs: ikMs, fkDraggingMs: Math.ceil(1000 / (FK_DRAGGING_RATE_SHARE * perSecond)) };
}

/**
 * A token bucket (the same rule as the server's RateLimiter) whose size and
 * refill follow `pacing()`, read at every call (the caps arrive after the
 * pacer is made).
 *
 * @param {{pacing: () => {burst: number, perSecond: number}, now?: () => number}} options
 *   now: milliseconds of a monotonic clock.
 * @returns {{delayMs: () => number, take: () => void}}
 */
export function createJobPacer({ pacing, now = () => performance.now() }) {
  let level = null;
  let then = now();

  function refill() {
    const { burst, perSecond } = pacing();
    const at = now();
    level = level === null ? burst : Math.min(burst, level + ((at - then) / 1000) * perSecond);
    then = at;
    return perSecond;
  }

  /** Milliseconds until one start is allowed; 0 when it is allowed now. */
  function delayMs() {
    const perSecond = refill();
    return level >= 1 ? 0 : Math.ceil((1000 * (1 - level)) / perSecond);
  }

  /** Count one start. */
  function take() {
    refill();
    level = Math.max(0, level - 1);
  }

  return { delayMs, take };
}
