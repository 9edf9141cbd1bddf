import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  onlyRunFolder,
  readJson,
  sampleRows,
  startDaemon,
  startPtyRig,
  type PtyRig,
} from './pty-helpers.js';

async function until(cond: () => boolean, ms: number, what: string): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out: ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

// The USB adapter pulled and put back (socat killed and started again), then pulled for good.
describe('end to end over a pseudo-terminal: the link goes away and comes back', () => {
  let rig: PtyRig;
  let folder: string;
  let exitCode: number | null;
  let output = '';
  let reconnectS = Infinity;

  beforeAll(async () => {
    rig = await startPtyRig('demo', ['--seed', '3']);
    const runs = join(rig.dir, 'runs');
    const d = startDaemon([
      '--port',
      rig.hostPath,
      '--chemistry',
      'li-ion',
      '--no-live',
      '--link-timeout',
      '4',
      '--runs',
      runs,
    ]);
    await until(() => rig.readTruth().truth.loadOn, 20_000, 'the load to go on');
    await new Promise((r) => setTimeout(r, 1500));
    folder = onlyRunFolder(runs);
    const events = (): string => readFileSync(join(folder, 'events.jsonl'), 'utf8');
    // A short outage: back within the link timeout and before the rig's watchdog.
    await rig.unplug();
    await new Promise((r) => setTimeout(r, 1500));
    const back = Date.now();
    await rig.plugIn();
    await until(() => events().includes('"link_up"'), 10_000, 'the daemon to reconnect');
    reconnectS = (Date.now() - back) / 1000;
    await new Promise((r) => setTimeout(r, 2500));
    // A long outage: longer than --link-timeout 4.
    await rig.unplug();
    exitCode = await d.exit;
    output = d.stdout() + d.stderr();
  }, 120_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('reconnects within about two seconds of the port returning, and the load stayed on', () => {
    expect(reconnectS).toBeLessThan(2.5);
    const names = readFileSync(join(folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => (JSON.parse(l) as { event: string }).event);
    const i = names.indexOf('link_down');
    expect(i).toBeGreaterThan(0);
    expect(names.slice(i)).toEqual(
      expect.arrayContaining(['link_closed', 'link_up', 'load_still_on']),
    );
  });

  it('no sample is duplicated or reordered across the reconnect', () => {
    const rows = sampleRows(folder);
    const seqs = rows.map((r) => Number(r.split(',')[3]));
    for (let i = 1; i < seqs.length; i++) expect(seqs[i]!).toBeGreaterThan(seqs[i - 1]!);
  });

  it('a long outage ends the run as link_lost, exit 3, and the rig cut its own load', async () => {
    expect(exitCode, output).toBe(3);
    const result = readJson<{ end_reason: string }>(join(folder, 'result.json'));
    expect(result.end_reason).toBe('link_lost');
    await until(() => !rig.readTruth().truth.loadOn, 10_000, 'the rig watchdog');
    expect(rig.readTruth().load_log.at(-1)).toMatchObject({ on: false, cause: 'watchdog' });
  });
});
