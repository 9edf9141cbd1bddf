import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { decodeRigLine } from '../../src/protocol/codec.js';
import type { ChannelOutcome, ChannelRun } from '../../src/station/channel-runner.js';
import { startStation, stationExitCode } from '../../src/station/station-daemon.js';

afterEach(() => vi.unstubAllEnvs());

describe('the station daemon', () => {
  it('exit code: a safety limit anywhere before a failure before a refusal; 0 when all ended normally', () => {
    expect(stationExitCode([0, 0, 3, 1, 2])).toBe(3);
    expect(stationExitCode([0, 2, 1])).toBe(1);
    expect(stationExitCode([0, 2])).toBe(2);
    expect(stationExitCode([0, 0])).toBe(0);
  });

  it('runs simulated rigs on one virtual clock, each channel seeing only its own frames, and serves the overview', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cellvigil-stationd-'));
    vi.stubEnv('CELLVIGIL_HOME', dir);
    const file = join(dir, 'bench.yaml');
    writeFileSync(
      file,
      `runs: runs\nlisten: 127.0.0.1:0\nrigs:\n  a:\n    sim: quad-a\n    channels:\n      0: { chemistry: li-ion }\n      2: { chemistry: li-ion }\n  b:\n    sim: quick\n    channels:\n      0: { chemistry: li-ion }\n`,
    );
    const seen = new Map<string, Set<number>>();
    const handle = await startStation(
      {
        file,
        runs: 'ignored',
        listen: undefined,
        speed: 20,
        once: false,
        fresh: false,
        linkTimeoutS: 60,
      },
      { print: () => undefined },
      async (r) => {
        const key = `${r.plan.rig}/${r.plan.channel}`;
        seen.set(key, new Set());
        let end!: (o: ChannelOutcome) => void;
        const done = new Promise<ChannelOutcome>((res) => (end = res));
        await r.source.open({
          line: (t) => {
            const d = decodeRigLine(t, 12);
            if (d.ok && d.message.kind === 'data') seen.get(key)!.add(d.message.channel);
          },
          overlong: () => undefined,
          closed: () => undefined,
        });
        const run: ChannelRun = {
          folder: join(dir, 'runs', key.replace('/', '-')),
          done,
          stop: () =>
            end({ exitCode: key === 'a/2' ? 3 : 0, folder: '', result: { end_reason: 'stopped' } }),
          setCutoffPerCell: () => ({ ok: true }),
          mark: () => ({ ok: true }),
        };
        return run;
      },
    );
    await vi.waitFor(() => expect([...seen.values()].every((s) => s.size > 0)).toBe(true));
    expect(Object.fromEntries([...seen].map(([k, s]) => [k, [...s]]))).toEqual({
      'a/0': [0],
      'a/2': [2],
      'b/0': [0],
    });
    const overview = (await (await fetch(`${handle.liveUrl!}api/state?view=station`)).json()) as {
      channels: { channel: string }[];
    };
    expect(overview.channels.map((c) => c.channel)).toEqual(['a/0', 'a/2', 'b/0']);
    expect(await handle.stop('test')).toBe(3);
    expect(await handle.done).toBe(3);
  });
});
