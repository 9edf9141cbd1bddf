import { describe, expect, it } from 'vitest';
import { LiveHub } from '../../src/live/live-hub.js';
import type { BroadcastMessage, ControlRequest } from '../../src/live/live-types.js';
import { checkClientMessage, checkServerMessage } from '../../src/live/message-schemas.js';
import { DEMO_RUN, scriptedDischarge } from './helpers.js';

function recording(hub: LiveHub): BroadcastMessage[] {
  const seen: BroadcastMessage[] = [];
  hub.subscribe((m) => seen.push(m));
  return seen;
}

describe('live hub', () => {
  it('broadcasts every kind of message in a form its own schema accepts', () => {
    const hub = new LiveHub({ historyPoints: 50 });
    const seen = recording(hub);
    hub.setRun(DEMO_RUN);
    hub.onControl(() => ({ ok: true }));
    hub.state({ host_s: 0, from: 'waiting', to: 'discharging', why: 'load on' });
    for (const s of scriptedDischarge(300)) hub.sample(s);
    hub.sample({ ...[...scriptedDischarge(1)][0]!, host_s: 300, temperature_C: Number.NaN });
    hub.alarm({ host_s: 300, kind: 'thermistor_open', detail: 'no temperature reading' });
    hub.cutoffChanged(6.2);
    expect(hub.control({ type: 'mark', note: 'fan on' })).toEqual({ ok: true });
    hub.result({ end_reason: 'cutoff', capacity_Ah: 0.158, energy_Wh: 1.2, duration_s: 300 });
    const types = new Set(seen.map((m) => m.type));
    expect([...types].sort()).toEqual([
      'alarm',
      'cutoff',
      'hello',
      'mark',
      'result',
      'sample',
      'state',
    ]);
    for (const m of [...seen, hub.hello()])
      expect(checkServerMessage(JSON.parse(JSON.stringify(m)))).toMatchObject({ ok: true });
  });

  it('hello carries the run so far: bounded history ending at the newest sample, events, alarms, cutoff', () => {
    const hub = new LiveHub({ historyPoints: 64 });
    hub.setRun(DEMO_RUN);
    hub.state({ host_s: 0, from: 'starting', to: 'discharging', why: 'load confirmed' });
    const all = [...scriptedDischarge(5001)];
    for (const s of all) hub.sample(s);
    const h = hub.hello();
    expect(h.history.points.length).toBeLessThanOrEqual(65);
    expect(h.history.points[0]![0]).toBe(0);
    expect(h.history.points[h.history.points.length - 1]![0]).toBe(5000);
    expect(h.status.sample?.host_s).toBe(5000);
    expect(h.status.cutoff_V).toBe(DEMO_RUN.cutoff_V);
    expect(h.events).toEqual([
      { kind: 'state', host_s: 0, from: 'starting', to: 'discharging', why: 'load confirmed' },
    ]);
    expect(h.status.time_to_cutoff_s).not.toBeNull();
  });

  it('a new run resets what the hub knew and sends a fresh hello', () => {
    const hub = new LiveHub();
    hub.setRun(DEMO_RUN);
    for (const s of scriptedDischarge(10)) hub.sample(s);
    hub.alarm({ host_s: 5, kind: 'x', detail: 'y' });
    const seen = recording(hub);
    hub.setRun({ ...DEMO_RUN, label: 'next' });
    expect(seen).toHaveLength(1);
    const h = seen[0]!;
    expect(h.type === 'hello' && h.run?.label).toBe('next');
    expect(h.type === 'hello' && h.history.points.length + h.alarms.length).toBe(0);
  });

  it('refuses a cutoff below the floor itself, without asking the daemon (safety floor, common practice)', () => {
    const hub = new LiveHub();
    hub.setRun(DEMO_RUN);
    const asked: ControlRequest[] = [];
    hub.onControl((c) => (asked.push(c), { ok: true }));
    const seen = recording(hub);
    for (const v of [DEMO_RUN.floor_V - 0.001, -1, Number.NaN, Number.NEGATIVE_INFINITY]) {
      const r = hub.control({ type: 'set-cutoff', cutoff_V: v });
      expect(r.ok).toBe(false);
      // The refusal says the deliberate way to follow a datasheet: a profile made from it.
      if (!r.ok) expect(r.error).toMatch(/chemistry profile made from it/);
    }
    expect(asked).toEqual([]);
    expect(seen).toEqual([]);
    expect(hub.control({ type: 'set-cutoff', cutoff_V: DEMO_RUN.floor_V })).toEqual({ ok: true });
    expect(asked).toEqual([{ type: 'set-cutoff', cutoff_V: DEMO_RUN.floor_V }]);
  });

  it('refuses a cutoff at or above the present voltage (it would end the run now) unless confirmed', () => {
    // Two Li-ion cells loaded at 8.2 V: 10 V (5 V per cell typed for 4.1 V) is a slip.
    const hub = new LiveHub();
    hub.setRun(DEMO_RUN);
    const asked: ControlRequest[] = [];
    hub.onControl((c) => (asked.push(c), { ok: true }));
    const seen = recording(hub);
    const first = [...scriptedDischarge(1)][0]!;
    hub.sample(first);
    for (const v of [10, first.voltage_V]) {
      const r = hub.control({ type: 'set-cutoff', cutoff_V: v });
      expect(r).toMatchObject({ ok: false, error: expect.stringMatching(/would end the run now/) });
      if (!r.ok) expect(r.error).toMatch(/--confirm/);
    }
    expect(asked).toEqual([]);
    expect(hub.control({ type: 'set-cutoff', cutoff_V: 7.0 })).toEqual({ ok: true });
    expect(hub.control({ type: 'set-cutoff', cutoff_V: 10, confirm: true })).toEqual({ ok: true });
    expect(asked).toHaveLength(2);
    // The change reaches viewers with who made it, in a form the schema accepts.
    hub.cutoffChanged(7.0, 'live control');
    const m = seen.find((x) => x.type === 'cutoff')!;
    expect(m).toMatchObject({ cutoff_V: 7.0, by: 'live control', host_s: 0 });
    expect(checkServerMessage(m).ok).toBe(true);
    expect(
      checkClientMessage({ type: 'set-cutoff', v: 1, token: 't', cutoff_V: 6, confirm: true }).ok,
    ).toBe(true);
  });

  it("refuses control before a run, without a daemon handler, and after the run ended; passes on the daemon's refusal", () => {
    const hub = new LiveHub();
    expect(hub.control({ type: 'stop' })).toMatchObject({
      ok: false,
      error: 'no run is active yet',
    });
    hub.setRun(DEMO_RUN);
    expect(hub.control({ type: 'stop' })).toMatchObject({ ok: false });
    hub.onControl(() => ({ ok: false, error: 'busy' }));
    expect(hub.control({ type: 'mark', note: 'n' })).toEqual({ ok: false, error: 'busy' });
    expect(hub.hello().events).toEqual([]);
    hub.result({ end_reason: 'stopped' });
    expect(hub.control({ type: 'stop' })).toMatchObject({ ok: false, error: 'the run has ended' });
  });

  it('keeps alarms and events bounded', () => {
    const hub = new LiveHub({ alarmsKept: 5, eventsKept: 7 });
    hub.setRun(DEMO_RUN);
    for (let i = 0; i < 100; i++) {
      hub.alarm({ host_s: i, kind: 'k', detail: String(i) });
      hub.state({ host_s: i, from: 'a', to: 'b', why: String(i) });
    }
    const h = hub.hello();
    expect(h.alarms.map((a) => a.detail)).toEqual(['95', '96', '97', '98', '99']);
    expect(h.events).toHaveLength(7);
  });
});

describe('control message schema', () => {
  it('accepts the three control messages and refuses anything else with a reason', () => {
    expect(checkClientMessage({ type: 'stop', v: 1, token: 't' }).ok).toBe(true);
    expect(
      checkClientMessage({ type: 'set-cutoff', v: 1, token: 't', cutoff_V: 6, id: 'a1' }).ok,
    ).toBe(true);
    expect(checkClientMessage({ type: 'mark', v: 1, token: 't', note: 'x' }).ok).toBe(true);
    const bad: unknown[] = [
      null,
      [],
      'stop',
      { type: 'stop', v: 2, token: 't' },
      { type: 'stop', v: 1 },
      { type: 'stop', v: 1, token: 't', extra: 1 },
      { type: 'set-cutoff', v: 1, token: 't', cutoff_V: '6' },
      { type: 'mark', v: 1, token: 't', note: '' },
      { type: 'mark', v: 1, token: 't', note: 'x'.repeat(501) },
      { type: 'set-limit', v: 1, token: 't' },
      { type: 'hello', v: 1, token: 't' },
    ];
    for (const b of bad) {
      const r = checkClientMessage(b);
      expect(r.ok, JSON.stringify(b)).toBe(false);
      if (!r.ok) expect(r.error.length).toBeGreaterThan(5);
    }
  });
});
