/**
 * What a station holds back for the broker while it cannot send, with a bound on each kind:
 * - retained statuses: one per topic, the newest replaces the older (a station and its channels);
 * - results: every one until the broker has acknowledged it (a run has one; they also sit in the
 *   run folder), at most `maxResults`, the oldest acknowledged-or-not given up past that;
 * - events (state changes, alarms, marks): in order, at most `maxEvents`, the oldest dropped and
 *   counted past that.
 * Samples are never held: a sample that cannot go now is stale by the time it could.
 * Pure: the caller sends what `take` hands out and says when the broker acknowledged it.
 */
export interface OutboxOptions {
  /** @default 500 */
  maxEvents?: number;
  /** @default 64 */
  maxResults?: number;
}

export interface Outgoing {
  topic: string;
  payload: string;
  retain: boolean;
  /** Results are handed back by `acked`; everything else is done once handed out. */
  isResult: boolean;
}

export class Outbox {
  private readonly statuses = new Map<string, string>();
  private readonly results = new Map<string, { payload: string; sent: boolean }>();
  private events: Outgoing[] = [];
  private readonly maxEvents: number;
  private readonly maxResults: number;
  /** Events dropped because the queue was full. */
  eventsDropped = 0;
  /** Results given up because too many waited. */
  resultsDropped = 0;

  constructor(o: OutboxOptions = {}) {
    this.maxEvents = o.maxEvents ?? 500;
    this.maxResults = o.maxResults ?? 64;
  }

  status(topic: string, payload: string): void {
    this.statuses.set(topic, payload);
  }

  event(topic: string, payload: string): void {
    this.events.push({ topic, payload, retain: false, isResult: false });
    if (this.events.length > this.maxEvents) {
      this.events.shift();
      this.eventsDropped++;
    }
  }

  result(topic: string, payload: string): void {
    this.results.delete(topic);
    this.results.set(topic, { payload, sent: false });
    if (this.results.size > this.maxResults) {
      const oldest = this.results.keys().next().value as string;
      this.results.delete(oldest);
      this.resultsDropped++;
    }
  }

  /** The broker has the result on this topic with this payload. */
  acked(topic: string, payload: string): void {
    if (this.results.get(topic)?.payload === payload) this.results.delete(topic);
  }

  /** After a lost connection every result not acknowledged goes out again. */
  resendResults(): void {
    for (const r of this.results.values()) r.sent = false;
  }

  /** Everything that should be sent now, in order: statuses, then events, then results. */
  take(): Outgoing[] {
    const out: Outgoing[] = [];
    for (const [topic, payload] of this.statuses)
      out.push({ topic, payload, retain: true, isResult: false });
    this.statuses.clear();
    out.push(...this.events);
    this.events = [];
    for (const [topic, r] of this.results)
      if (!r.sent) {
        r.sent = true;
        out.push({ topic, payload: r.payload, retain: true, isResult: true });
      }
    return out;
  }

  get waiting(): { statuses: number; events: number; results: number } {
    return { statuses: this.statuses.size, events: this.events.length, results: this.results.size };
  }
}
