import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { StationFeed } from '../../src/live/station-feed.js';
import type { Source, SourceHandlers } from '../../src/sources/source.js';
import type {
  ChannelOutcome,
  ChannelRun,
  ChannelRunRequest,
} from '../../src/station/channel-runner.js';
import { Station } from '../../src/station/station.js';
import { parseStationFile } from '../../src/station/station-file.js';

const FILE = `rigs:
  left:
    port: /dev/left
    channels:
      0: { chemistry: li-ion, cell_id: A-1 }
      1: { chemistry: nimh, cells: 4 }
  right:
    port: /dev/right
    channels:
      2: { chemistry: li-ion }
      3: empty
`;

class FakePort implements Source {
  readonly kind = 'serial' as const;
  handlers: SourceHandlers | null = null;
  constructor(
    readonly description: string,
    private readonly fails = false,
  ) {}
  async open(h: SourceHandlers): Promise<void> {
    if (this.fails) throw new Error(`cannot open ${this.description}`);
    this.handlers = h;
  }
  write(): boolean {
    return true;
  }
  async close(): Promise<void> {}
}

/** A run that ends when asked (stopped) or when the test ends it; records what it was asked. */
class FakeRun implements ChannelRun {
  readonly done: Promise<ChannelOutcome>;
  end!: (reason: string) => void;
  cutoffs: number[] = [];
  marks: string[] = [];
  constructor(
    readonly folder: string,
    readonly request: ChannelRunRequest,
  ) {
    this.done = new Promise((resolve) => {
      this.end = (reason) => resolve({ exitCode: 0, folder, result: { end_reason: reason } });
    });
  }
  stop(): void {
    this.end('stopped');
  }
  setCutoffPerCell(v: number) {
    if (v < 1.0) return { ok: false as const, error: 'below the floor' };
    this.cutoffs.push(v);
    return { ok: true as const };
  }
  mark(note: string): { ok: true } {
    this.marks.push(note);
    return { ok: true };
  }
}

function setup(o: { failRight?: boolean; fresh?: boolean; runs?: string } = {}) {
  const runs = o.runs ?? mkdtempSync(join(tmpdir(), 'cellvigil-station-'));
  const runsMade: FakeRun[] = [];
  const printed: string[] = [];
  const ports = new Map<string, FakePort>();
  const feed = new StationFeed();
  const station = new Station({
    plan: parseStationFile(FILE, '/lab/station.yaml'),
    name: 'lab',
    runs,
    runner: async (r) => {
      const folder = r.resume ?? join(runs, `${r.plan.rig}-${r.plan.channel}-${runsMade.length}`);
      mkdirSync(folder, { recursive: true });
      writeFileSync(join(folder, 'manifest.json'), '{}');
      const run = new FakeRun(folder, r);
      runsMade.push(run);
      return run;
    },
    makeSource: (rig) => {
      const p = new FakePort(rig.name, rig.name === 'right' && o.failRight === true);
      ports.set(rig.name, p);
      return p;
    },
    clock: null,
    feed,
    linkTimeoutS: 60,
    fresh: o.fresh ?? false,
    print: (l) => printed.push(l),
  });
  const running = (key: string) =>
    runsMade.filter((r) => `${r.request.plan.rig}/${r.request.plan.channel}` === key);
  return { station, runs, runsMade, printed, ports, feed, running };
}

describe('station orchestration', () => {
  it("starts a run per occupied channel, each on its rig's shared link, in rig and channel order", async () => {
    const s = setup();
    await s.station.start();
    expect(s.station.keys()).toEqual(['left/0', 'left/1', 'right/2']);
    expect(
      s.runsMade.map((r) => [r.request.plan.rig, r.request.plan.channel, r.request.cellId]),
    ).toEqual([
      ['left', 0, 'A-1'],
      ['left', 1, null],
      ['right', 2, null],
    ]);
    expect(s.runsMade[1]!.request.source.description).toBe('left, channel 1');
    expect(s.feed.keys()).toEqual(['left/0', 'left/1', 'right/2']);
    const index = JSON.parse(readFileSync(join(s.runs, 'station-lab.json'), 'utf8'));
    expect(Object.keys(index.channels)).toEqual(['left/0', 'left/1', 'right/2']);
  });

  it('a channel is stopped, re-cut and marked alone; the others keep running; the next run starts on a new cell', async () => {
    const s = setup();
    await s.station.start();
    const [l0, l1, r2] = s.runsMade;
    expect(s.station.control('left/1', { type: 'set-cutoff', cutoff_V: 4.4 }, 'test')).toEqual({
      ok: true,
    });
    expect(l1!.cutoffs).toEqual([1.1]); // 4.4 V for 4 cells in series is 1.1 V per cell
    expect(s.station.control('left/0', { type: 'mark', note: 'clip reseated' }, 'test')).toEqual({
      ok: true,
    });
    expect(s.station.control('left/0', { type: 'start' }, 'test').ok).toBe(false);
    s.station.control('left/0', { type: 'stop' }, 'test');
    await l0!.done;
    await new Promise((r) => setImmediate(r));
    expect(l0!.marks).toEqual(['clip reseated']);
    expect(s.station.control('left/0', { type: 'stop' }, 'test')).toEqual({
      ok: false,
      error: 'left/0 has no run going',
    });
    const r = await s.station.startChannel('left/0', 'A-2', 'test');
    expect(r).toEqual({ ok: true });
    expect(s.running('left/0').map((x) => x.request.cellId)).toEqual(['A-1', 'A-2']);
    // Nothing else was touched.
    expect(s.runsMade.filter((x) => x !== l0)).toHaveLength(3);
    for (const other of [l1, r2]) other!.end('cutoff');
    s.runsMade.at(-1)!.end('cutoff');
    await s.station.whenIdle();
    expect([...s.station.outcomes().values()].map((x) => x?.result['end_reason'])).toEqual([
      'cutoff',
      'cutoff',
      'cutoff',
    ]);
  });

  it('a rig whose port cannot be opened is reported; the other rig runs', async () => {
    const s = setup({ failRight: true });
    await s.station.start();
    expect(s.runsMade.map((r) => r.request.plan.rig)).toEqual(['left', 'left']);
    expect(s.printed.join('\n')).toMatch(/rig right: cannot open right/);
    expect(await s.station.startChannel('right/2', null, 'test')).toEqual({
      ok: false,
      error: 'rig right is not connected',
    });
  });

  it('after a crash every unfinished channel resumes from its own folder; a finished one waits for a start', async () => {
    const first = setup();
    await first.station.start();
    first.runsMade[1]!.end('cutoff');
    await new Promise((r) => setImmediate(r));
    writeFileSync(join(first.runsMade[1]!.folder, 'result.json'), '{}');
    // The daemon dies here: no result for left/0 and right/2.
    const again = setup({ runs: first.runs });
    await again.station.start();
    expect(again.runsMade.map((r) => [r.request.plan.channel, r.request.resume])).toEqual([
      [0, first.runsMade[0]!.folder],
      [2, first.runsMade[2]!.folder],
    ]);
    expect(again.printed.join('\n')).toContain('left/1: its last run has ended');
    const fresh = setup({ runs: first.runs, fresh: true });
    await fresh.station.start();
    expect(fresh.runsMade.map((r) => r.request.resume)).toEqual([null, null, null]);
  });

  it('stopAll stops every channel and waits for their results', async () => {
    const s = setup();
    await s.station.start();
    await s.station.stopAll('SIGINT');
    expect([...s.station.outcomes().values()].map((x) => x?.result['end_reason'])).toEqual([
      'stopped',
      'stopped',
      'stopped',
    ]);
    expect(await s.station.startChannel('left/0', null, 'test')).toEqual({
      ok: false,
      error: 'the station is stopping',
    });
  });
});
