/**
 * `cellvigil run --broker …` end to end: the real daemon on the simulated rig publishes to a
 * real Mosquitto, takes a mark through the broker with its control token, and says goodbye with
 * a retained offline status. The mark lands in the run's event log saying it came through the
 * broker, not from the live page.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { parsePayload } from '../../src/fleet/payloads.js';
import { channelTopic, stationTopic } from '../../src/fleet/topics.js';
import { bareClient, until } from './helpers.js';
import { startBroker } from './mosquitto.js';

const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));

describe('run --broker', () => {
  it('publishes the run, takes a broker command with the token, and goes offline when done', async () => {
    expect(existsSync(CLI), 'build first: npm run build').toBe(true);
    const broker = await startBroker([
      { username: 'bench-r', password: 'r' },
      { username: 'fleet', password: 'f' },
    ]);
    try {
      const watcher = await bareClient(broker, 'fleet', 'f');
      const seen: Array<[string, Buffer]> = [];
      watcher.on('message', (t, p) => seen.push([t, p]));
      await watcher.subscribeAsync('cellvigil/v1/#', { qos: 1 });
      const home = mkdtempSync(join(tmpdir(), 'cv-run-broker-'));
      const runs = join(home, 'runs');
      const creds = broker.credentialsFile({ username: 'bench-r', password: 'r' });
      const args = ['run', '--sim', 'quick', '--speed', '5', '--once', '--listen', '127.0.0.1:0'];
      args.push('--runs', runs, '--broker', broker.url, '--broker-credentials', creds);
      args.push('--station', 'bench-r');
      const daemon = spawn(process.execPath, [CLI, ...args], {
        env: { ...process.env, CELLVIGIL_HOME: home },
        stdio: ['ignore', 'ignore', 'inherit'],
      });
      const exit = new Promise((r) => daemon.once('exit', r));
      const of = (topic: string) => seen.filter(([t]) => t === topic).map(([, p]) => p);
      await until('samples', () => of(channelTopic('bench-r', 0, 'sample')).length > 3, 20_000);
      const { control } = JSON.parse(readFileSync(join(home, 'tokens.json'), 'utf8')) as {
        control: string;
      };
      const mark = { v: 1, station: 'bench-r', channel: 0, type: 'mark', note: 'via broker' };
      await watcher.publishAsync(
        channelTopic('bench-r', 0, 'command'),
        JSON.stringify({ ...mark, token: control, id: 'm1' }),
        { qos: 1 },
      );
      await until('reply', () => of(channelTopic('bench-r', 0, 'reply')).length > 0);
      expect(JSON.parse(of(channelTopic('bench-r', 0, 'reply'))[0]!.toString())).toMatchObject({
        id: 'm1',
        ok: true,
      });
      expect(await exit).toBe(0);
      const folder = join(runs, readdirSync(runs)[0]!);
      const onDisk = JSON.parse(readFileSync(join(folder, 'result.json'), 'utf8')) as unknown;
      await until('result', () => of(channelTopic('bench-r', 0, 'result')).length > 0, 5000);
      const sent = parsePayload('result', of(channelTopic('bench-r', 0, 'result'))[0]!);
      expect(sent.ok && sent.value.result).toEqual(onDisk);
      const last = of(stationTopic('bench-r')).at(-1)!;
      expect(parsePayload('station', last)).toMatchObject({
        ok: true,
        value: { online: false, reason: 'stopped' },
      });
      const events = readFileSync(join(folder, 'events.jsonl'), 'utf8');
      const logged = events.split('\n').find((l) => l.includes('via broker'));
      expect(logged).toMatch(
        /"by":"fleet command through broker mqtt:\/\/127\.0\.0\.1:\d+, from a client that did not name itself \(command m1\)"/,
      );
      await watcher.endAsync();
    } finally {
      await broker.stop();
    }
  }, 60_000);
});
