// Pacing of the jobs the page starts by itself (joint maps, reach sections)
// on a reviewer's page. The server caps a reviewer's job starts per address
// with a token bucket (server/posebridge/api/auth.py, REVIEWER_CAPS["heavy"]:
// 8 at once, then one every 4 s); the page keeps its automatic starts in a
// smaller bucket of the same kind, so they wait here instead of being refused
// there, and the reviewer's own base placement searches still find room.

/** Automatic job starts a reviewer's page makes at once, below the server's 8. */
const REVIEW_JOB_BURST = 6;
/** Automatic job starts per second after the burst, below the server's 0.25. */
const REVIEW_JOB_PER_SECOND = 0.2;

/**
 * A token bucket (the same rule as the server's RateLimiter): `burst` starts
 * at once, refilled at `perSecond`.
 *
 * @param {{burst?: number, perSecond?: number, now?: () => number}} options
 *   now: milliseconds of a monotonic clock.
 * @returns {{delayMs: () => number, take: () => void}}
 */
export function createJobPacer({ burst = REVIEW_JOB_BURST, perSecond = REVIEW_JOB_PER_SECOND, now = () => performance.now() } = {}) {
  let level = burst;
  let then = now();

  function refill() {
    const at = now();
    level = Math.min(burst, level + ((at - then) / 1000) * perSecond);
    then = at;
  }

  /** Milliseconds until one start is allowed; 0 when it is allowed now. */
  function delayMs() {
    refill();
    return level >= 1 ? 0 : Math.ceil((1000 * (1 - level)) / perSecond);
  }

  /** Count one start. */
  function take() {
    refill();
    level = Math.max(0, level - 1);
  }

  return { delayMs, take };
}
