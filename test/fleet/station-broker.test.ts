/**
 * A station of two simulated rigs publishing every channel on one broker connection (a real
 * Mosquitto on loopback), filing each finished run with a cell id into the registry, and taking
 * a mark through the broker that its run's event log attributes to the broker and the sender.
 * Retained results reaching a later subscriber: OASIS MQTT Version 5.0 §3.3.1.3 (from memory).
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { channelRunner } from '../../src/cli/station-runner.js';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { parsePayload } from '../../src/fleet/payloads.js';
import { channelTopic, SENDER_PROPERTY, stationTopic } from '../../src/fleet/topics.js';
import { loadTokens } from '../../src/live/tokens.js';
import { Registry } from '../../src/registry/registry-db.js';
import { startStation } from '../../src/station/station-daemon.js';
import { bareClient, until } from './helpers.js';
import { startBroker } from './mosquitto.js';

afterEach(() => vi.unstubAllEnvs());

describe('station --broker --registry', () => {
  it('publishes every channel (two rigs: numbered in file order), files each run, logs who asked', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-station-broker-'));
    vi.stubEnv('CELLVIGIL_HOME', dir);
    const broker = await startBroker([
      { username: 'bench-s', password: 's' },
      { username: 'fleet', password: 'f' },
    ]);
    try {
      const watcher = await bareClient(broker, 'fleet', 'f');
      const seen: Array<[string, Buffer]> = [];
      watcher.on('message', (t, p) => seen.push([t, p]));
      await watcher.subscribeAsync('cellvigil/v1/#', { qos: 1 });
      const file = join(dir, 'lab.yaml');
      writeFileSync(
        file,
        'runs: runs\nlisten: 127.0.0.1:0\nrigs:\n  a:\n    sim: quad-a\n    channels:\n' +
          '      0: { chemistry: li-ion, cell_id: A-2 }\n  b:\n    sim: quick-slow\n    channels:\n' +
          '      0: { chemistry: li-ion, cell_id: B-0 }\n',
      );
      const lines: string[] = [];
      const print = (l: string): void => void lines.push(l);
      const registry = join(dir, 'lab.sqlite');
      const fleet = {
        broker: resolveBroker(
          {
            url: broker.url,
            credentialsFile: broker.credentialsFile({ username: 'bench-s', password: 's' }),
          },
          'cv-bench-s',
        ),
        station: 'bench-s',
        sampleHz: 5,
      };
      const handle = await startStation(
        {
          file,
          runs: 'x',
          listen: undefined,
          speed: 20,
          once: true,
          fresh: true,
          linkTimeoutS: 60,
          registry,
          fleet,
        },
        { print },
        channelRunner({ print }),
      );
      expect(lines).toContain(
        'fleet: publishing as station bench-s to ' + broker.url + ' (a/0 → ch 0, b/0 → ch 1)',
      );
      const of = (topic: string) => seen.filter(([t]) => t === topic).map(([, p]) => p);
      await until(
        'samples of b/0',
        () => of(channelTopic('bench-s', 1, 'sample')).length > 0,
        20_000,
      );
      const token = loadTokens().tokens.control;
      await watcher.publishAsync(
        channelTopic('bench-s', 1, 'command'),
        JSON.stringify({
          v: 1,
          station: 'bench-s',
          channel: 1,
          type: 'mark',
          note: 'from afar',
          token,
          id: 'k1',
        }),
        { qos: 1, properties: { userProperties: { [SENDER_PROPERTY]: 'a test page' } } },
      );
      await until('reply', () => of(channelTopic('bench-s', 1, 'reply')).length > 0);
      // A start reaches the station, which refuses it while the channel's run is going; a start
      // naming a cell id the registry could not file never gets that far.
      const start = { v: 1, station: 'bench-s', channel: 1, type: 'start', token };
      await watcher.publishAsync(
        channelTopic('bench-s', 1, 'command'),
        JSON.stringify({ ...start, cell_id: 'B-1', id: 's1' }),
        { qos: 1 },
      );
      await watcher.publishAsync(
        channelTopic('bench-s', 1, 'command'),
        JSON.stringify({ ...start, cell_id: ' no spaces', id: 's2' }),
        { qos: 1 },
      );
      await until('start replies', () => of(channelTopic('bench-s', 1, 'reply')).length >= 3);
      const replies = of(channelTopic('bench-s', 1, 'reply')).map(
        (p) => JSON.parse(p.toString()) as Record<string, unknown>,
      );
      expect(replies.find((r) => r['id'] === 's1')).toMatchObject({
        ok: false,
        request: 'start',
        code: 'refused',
        error: 'b/0 is running; stop it first',
      });
      expect(replies.find((r) => r['code'] === 'malformed')).toMatchObject({ ok: false });
      expect(await handle.done).toBe(0);
      for (const ch of [0, 1])
        await until(`result ch ${ch}`, () => of(channelTopic('bench-s', ch, 'result')).length > 0);
      const r = Registry.open(registry);
      const filedA = r.runsOf('A-2');
      const filedB = r.runsOf('B-0');
      r.close();
      expect([filedA.length, filedB.length]).toEqual([1, 1]);
      // The registry's figures are the results the broker carried (the run folders' own).
      const sentB = parsePayload('result', of(channelTopic('bench-s', 1, 'result'))[0]!);
      expect(sentB.ok && sentB.value.result['capacity_Ah']).toBe(filedB[0]!.capacity_Ah);
      expect(lines.filter((l) => /: filed in the registry/.test(l))).toHaveLength(2);
      const folderB = filedB[0]!.folder;
      const events = readFileSync(join(dir, 'runs', folderB, 'events.jsonl'), 'utf8');
      expect(events.split('\n').find((l) => l.includes('from afar'))).toContain(
        `fleet command through broker ${broker.url}, from \\"a test page\\" (command k1)`,
      );
      expect(parsePayload('station', of(stationTopic('bench-s')).at(-1)!)).toMatchObject({
        ok: true,
        value: { online: false, reason: 'stopped', channels: [0, 1] },
      });
      await watcher.endAsync();
    } finally {
      await broker.stop();
      rmSync(dir, { recursive: true, force: true });
    }
  }, 90_000);
});
