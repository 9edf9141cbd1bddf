import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { checkServerMessage } from '../../src/live/message-schemas.js';
import { tempHome, Viewer } from './helpers.js';

/** The built package, as `npm test` builds it first (pretest). */
const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));

function exited(p: ChildProcess): Promise<number | null> {
  return p.exitCode !== null
    ? Promise.resolve(p.exitCode)
    : new Promise((r) => p.once('exit', (code) => r(code)));
}

// The real daemon on the simulated rig (a small Li-ion cell run to its cutoff at 4× speed: long
// enough for `watch` to connect even when the machine is slow to start it),
// a WebSocket viewer and `cellvigil watch` following it from start to end.
describe('live feed of a real run', () => {
  const home = tempHome();
  const runs = join(home, 'runs');
  const env = { ...process.env, CELLVIGIL_HOME: home };
  let daemonOut = '';
  let daemonCode: number | null = null;
  let watchOut = '';
  let watchCode: number | null = null;
  let viewer: Viewer;
  let replies: { wrong: unknown; low: unknown; mark: unknown };

  beforeAll(async () => {
    expect(existsSync(CLI), 'build first: npm run build').toBe(true);
    const daemon = spawn(
      process.execPath,
      [
        CLI,
        'run',
        '--sim',
        'quick',
        '--speed',
        '4',
        '--listen',
        '127.0.0.1:0',
        '--once',
        '--runs',
        runs,
      ],
      { env, stdio: ['ignore', 'pipe', 'pipe'] },
    );
    daemon.stdout!.on('data', (d: Buffer) => (daemonOut += d.toString()));
    daemon.stderr!.on('data', (d: Buffer) => (daemonOut += d.toString()));
    const daemonExit = exited(daemon);
    const until = Date.now() + 20_000;
    let url: string | undefined;
    while (!(url = /^live: (http:\/\/127\.0\.0\.1:\d+\/)$/m.exec(daemonOut)?.[1])) {
      if (Date.now() > until || daemon.exitCode !== null)
        throw new Error(`no live address printed:\n${daemonOut}`);
      await new Promise((r) => setTimeout(r, 10));
    }
    viewer = new Viewer(`${url.replace('http', 'ws')}live`);
    const watch = spawn(process.execPath, [CLI, 'watch', url], {
      env,
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    watch.stdout!.on('data', (d: Buffer) => (watchOut += d.toString()));
    watch.stderr!.on('data', (d: Buffer) => (watchOut += d.toString()));

    // Control while the run goes on: a wrong token, a cutoff below the floor, a note.
    await viewer.until((v) => v.of('hello').length === 1, 10_000);
    const { control } = JSON.parse(readFileSync(join(home, 'tokens.json'), 'utf8')) as {
      control: string;
    };
    const floor = viewer.of('hello')[0]!.run!.floor_V;
    viewer.send({ type: 'set-cutoff', v: 1, id: 'wrong', token: 'x'.repeat(64), cutoff_V: 3.2 });
    viewer.send({ type: 'set-cutoff', v: 1, id: 'low', token: control, cutoff_V: floor - 0.05 });
    viewer.send({ type: 'mark', v: 1, id: 'mark', token: control, note: 'checked the clamp' });
    await viewer.until(
      (v) =>
        v.messages.filter((m) => (m.type === 'ack' || m.type === 'error') && m.id !== null)
          .length === 3,
      10_000,
    );
    const reply = (id: string) =>
      viewer.messages.find((m) => (m.type === 'ack' || m.type === 'error') && m.id === id);
    replies = { wrong: reply('wrong'), low: reply('low'), mark: reply('mark') };

    await viewer.until((v) => v.of('result').length === 1, 60_000);
    daemonCode = await daemonExit;
    watchCode = await exited(watch);
  }, 120_000);

  afterAll(() => viewer?.close());

  it('streams hello, samples, state changes and the result, all schema-valid', () => {
    const hello = viewer.of('hello')[0]!;
    expect(hello.run).toMatchObject({
      chemistry: 'li-ion',
      cells: 1,
      source: expect.stringContaining('quick'),
    });
    const samples = viewer.of('sample');
    expect(samples.length).toBeGreaterThan(20);
    // A discharge: the voltage under load ends lower than it started, the charge only grows.
    const loaded = samples.filter((s) => s.load_on);
    expect(loaded.at(-1)!.voltage_V).toBeLessThan(loaded[0]!.voltage_V);
    for (let i = 1; i < samples.length; i++)
      expect(samples[i]!.charge_Ah).toBeGreaterThanOrEqual(samples[i - 1]!.charge_Ah);
    const states = viewer.of('state').map((s) => s.to);
    expect(states).toContain('stopping');
    for (const m of viewer.messages)
      expect(checkServerMessage(m), JSON.stringify(m).slice(0, 200)).toMatchObject({ ok: true });
  });

  it("the result message is the run folder's result.json, and the daemon and watch exit with the same code", () => {
    const folder = join(runs, readdirSync(runs)[0]!);
    const onDisk = JSON.parse(readFileSync(join(folder, 'result.json'), 'utf8')) as Record<
      string,
      unknown
    >;
    const sent = viewer.of('result')[0]!.result;
    expect(sent).toEqual(onDisk);
    expect(onDisk.end_reason).toBe('cutoff');
    expect(daemonCode).toBe(0);
    expect(watchCode).toBe(daemonCode);
    expect(watchOut).toMatch(/ended: cutoff/);
  });

  it('refused control changed nothing; the note reached the event log', () => {
    expect(replies.wrong).toMatchObject({ type: 'error', code: 'unauthorized' });
    expect(replies.low).toMatchObject({
      type: 'error',
      code: 'refused',
      error: expect.stringContaining('floor'),
    });
    expect(replies.mark).toMatchObject({ type: 'ack', request: 'mark' });
    const folder = join(runs, readdirSync(runs)[0]!);
    const events = readFileSync(join(folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(events.some((e) => JSON.stringify(e).includes('checked the clamp'))).toBe(true);
    expect(events.some((e) => e.event === 'cutoff_changed')).toBe(false);
    expect(viewer.of('cutoff')).toEqual([]);
  });
});
