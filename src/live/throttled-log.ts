import type { Clock } from '../core/clock.js';
import type { LiveFeedEvent } from '../record/events.js';

/**
 * At most 30 feed events a minute reach the event log; the rest are counted and reported in one
 * line, so someone hammering the port cannot grow the log without bound.
 */
export function throttled(
  log: (e: LiveFeedEvent) => void,
  clock: Clock,
  perMinute = 30,
): (e: LiveFeedEvent) => void {
  let windowStart = clock.now();
  let count = 0;
  let suppressed = 0;
  return (e: LiveFeedEvent): void => {
    const now = clock.now();
    if (now - windowStart >= 60_000) {
      if (suppressed > 0)
        log({
          event: 'live_events_suppressed',
          count: suppressed,
          seconds: Math.round((now - windowStart) / 1000),
        });
      windowStart = now;
      count = 0;
      suppressed = 0;
    }
    if (count++ < perMinute) log(e);
    else suppressed++;
  };
}
