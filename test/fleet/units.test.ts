import { chmodSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadCredentials, resolveBroker } from '../../src/fleet/broker-options.js';
import { takeCommand } from '../../src/fleet/command-intake.js';
import { Outbox } from '../../src/fleet/outbox.js';
import { parsePayload } from '../../src/fleet/payloads.js';
import {
  channelTopic,
  FLEET_SUBSCRIPTIONS,
  parseTopic,
  stationTopic,
} from '../../src/fleet/topics.js';

const dir = mkdtempSync(join(tmpdir(), 'cv-fleet-unit-'));

describe('topics', () => {
  it('name the station and channel and read back the same', () => {
    expect(channelTopic('bench-2', 7, 'sample')).toBe('cellvigil/v1/station/bench-2/ch/7/sample');
    expect(parseTopic(channelTopic('bench-2', 7, 'sample'))).toEqual({
      station: 'bench-2',
      channel: 7,
      kind: 'sample',
    });
    expect(parseTopic(stationTopic('b'))).toEqual({ station: 'b', channel: null, kind: 'status' });
  });

  it('refuse channels beyond protocol v1 (0..15), wildcards and other versions', () => {
    for (const t of [
      'cellvigil/v1/station/b/ch/16/sample',
      'cellvigil/v1/station/b/ch/01/sample',
      'cellvigil/v1/station/+/ch/1/sample',
      'cellvigil/v2/station/b/status',
      'cellvigil/v1/station/b/ch/1/other',
    ])
      expect(parseTopic(t), t).toBeNull();
  });

  it('a fleet view subscribes to everything but the commands, which carry tokens', () => {
    expect(FLEET_SUBSCRIPTIONS.some((s) => s.endsWith('/command'))).toBe(false);
    expect(FLEET_SUBSCRIPTIONS).toContain('cellvigil/v1/station/+/ch/+/sample');
  });
});

describe('the outbox', () => {
  it('keeps only the newest status per topic', () => {
    const o = new Outbox();
    o.status('s', '1');
    o.status('s', '2');
    expect(o.take()).toEqual([{ topic: 's', payload: '2', retain: true, isResult: false }]);
    expect(o.take()).toEqual([]);
  });

  it('bounds events and counts what it drops, oldest first', () => {
    const o = new Outbox({ maxEvents: 3 });
    for (let i = 0; i < 5; i++) o.event('e', String(i));
    expect(o.take().map((m) => m.payload)).toEqual(['2', '3', '4']);
    expect(o.eventsDropped).toBe(2);
  });

  it('keeps a result until acknowledged, and sends it again after a lost connection', () => {
    const o = new Outbox();
    o.result('r', 'x');
    expect(o.take()).toHaveLength(1);
    expect(o.take()).toHaveLength(0);
    o.resendResults();
    expect(o.take()).toHaveLength(1);
    o.acked('r', 'x');
    o.resendResults();
    expect(o.take()).toHaveLength(0);
  });
});

describe('broker options', () => {
  it('read credentials only from a file its owner alone can read', () => {
    const p = join(dir, 'creds.json');
    writeFileSync(p, JSON.stringify({ username: 'u', password: 'p' }));
    chmodSync(p, 0o644);
    expect(() => loadCredentials(p)).toThrow(/CV_BROKER_CONFIG|other users/);
    chmodSync(p, 0o600);
    expect(loadCredentials(p)).toEqual({ username: 'u', password: 'p' });
    writeFileSync(p, JSON.stringify({ username: 'u' }));
    expect(() => loadCredentials(p)).toThrow(/not valid/);
  });

  it('refuse a password in the address, an unknown scheme and TLS files without TLS', () => {
    expect(() => resolveBroker({ url: 'mqtt://u:p@h:1883' }, 'c')).toThrow(/--broker-credentials/);
    expect(() => resolveBroker({ url: 'http://h' }, 'c')).toThrow(/mqtt:\/\//);
    expect(() => resolveBroker({ url: 'mqtt://h', caFile: '/x' }, 'c')).toThrow(/TLS/);
    expect(resolveBroker({ url: 'mqtts://h:8883' }, 'c').url).toBe('mqtts://h:8883');
  });
});

describe('a command from the broker', () => {
  const token = 'k'.repeat(64);
  const cmd = (x: Record<string, unknown>) =>
    Buffer.from(JSON.stringify({ v: 1, station: 's', channel: 0, token, ...x }));
  const accept = () => () => ({ ok: true }) as const;
  const FROM = 'fleet command through broker mqtt://h, from "a test"';

  it('is refused unless it validates, names its own topic, and carries the control token', () => {
    expect(takeCommand('s', 0, cmd({ type: 'stop', extra: 1 }), token, accept, FROM)).toMatchObject(
      {
        ok: false,
        code: 'malformed',
      },
    );
    expect(
      takeCommand('s', 0, cmd({ type: 'stop', channel: 1 }), token, accept, FROM),
    ).toMatchObject({
      ok: false,
      code: 'malformed',
    });
    expect(
      takeCommand('s', 0, cmd({ type: 'stop', token: 'nope' }), token, accept, FROM),
    ).toMatchObject({
      ok: false,
      code: 'unauthorized',
    });
    expect(takeCommand('s', 0, cmd({ type: 'stop' }), null, accept, FROM)).toMatchObject({
      ok: false,
      code: 'unauthorized',
    });
    expect(takeCommand('s', 0, cmd({ type: 'stop' }), token, () => null, FROM)).toMatchObject({
      ok: false,
      code: 'refused',
    });
    expect(takeCommand('s', 0, cmd({ type: 'stop', id: 'i' }), token, accept, FROM)).toEqual({
      v: 1,
      station: 's',
      channel: 0,
      id: 'i',
      request: 'stop',
      ok: true,
    });
  });

  it('reaches the run saying where it came from: the broker, the sender and the command id', () => {
    const seen: string[] = [];
    const target = () => (_c: unknown, by: string) => (seen.push(by), { ok: true as const });
    takeCommand('s', 0, cmd({ type: 'mark', note: 'n', id: 'm7' }), token, target, FROM);
    takeCommand('s', 0, cmd({ type: 'stop' }), token, target, FROM);
    expect(seen).toEqual([`${FROM} (command m7)`, FROM]);
  });

  it('a start passes its cell id on, checked against the ids the registry files under', () => {
    const got: unknown[] = [];
    const target = () => (c: unknown) => (got.push(c), { ok: true as const });
    takeCommand('s', 0, cmd({ type: 'start', cell_id: 'L-031' }), token, target, FROM);
    takeCommand('s', 0, cmd({ type: 'start' }), token, target, FROM);
    expect(got).toEqual([{ type: 'start', cell_id: 'L-031' }, { type: 'start' }]);
    expect(
      takeCommand('s', 0, cmd({ type: 'start', cell_id: '-dash' }), token, target, FROM),
    ).toMatchObject({ ok: false, code: 'malformed' });
    expect(got).toHaveLength(2);
  });

  it('payloads are refused when too long or not JSON, before any parsing of their content', () => {
    expect(parsePayload('sample', Buffer.alloc(70_000, 32))).toMatchObject({ ok: false });
    expect(parsePayload('sample', Buffer.from('{'))).toMatchObject({
      ok: false,
      error: 'not JSON',
    });
  });
});
