import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { loadRigProfile, DEFAULT_RIG_PATH } from '../../src/chain/rig-profile-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import { startRun } from '../../src/run/daemon.js';
import { DEFAULT_SCENARIOS_PATH, loadScenarios, pickScenario } from '../../src/sim/scenarios.js';
import { SimSource } from '../../src/sources/sim-source.js';
import type { Source, SourceHandlers } from '../../src/sources/source.js';
import { referenceCalibration } from '../report/sim-run.js';

/**
 * The simulated rig behind a cable that can be pulled: while it is out no line reaches the
 * host and no command reaches the rig, which keeps running on its own supply (its watchdog
 * counting), as a USB cable pulled from a self-powered rig.
 */
class CableSource implements Source {
  readonly kind = 'serial' as const;
  readonly description = 'simulated rig on a cable';
  private handlers: SourceHandlers | null = null;
  private plugged = true;
  constructor(private readonly inner: SimSource) {}
  async open(h: SourceHandlers): Promise<void> {
    this.handlers = h;
    await this.inner.open({
      line: (t) => {
        if (this.plugged) h.line(t);
      },
      overlong: (n) => {
        if (this.plugged) h.overlong(n);
      },
      closed: (why) => h.closed(why),
    });
  }
  write(line: string): boolean {
    return this.plugged && this.inner.write(line);
  }
  close(): Promise<void> {
    return this.inner.close();
  }
  unplug(): void {
    this.plugged = false;
    this.handlers?.closed('cable pulled');
  }
  plugIn(): void {
    this.plugged = true;
    this.handlers?.reopened?.();
  }
}

function events(folder: string): { event: string; [k: string]: unknown }[] {
  return readFileSync(join(folder, 'events.jsonl'), 'utf8')
    .trim()
    .split('\n')
    .map((l) => JSON.parse(l) as { event: string });
}

// Charge is the time integral of current (physics); the simulated rig integrates its true
// current over 10 ms steps, and its watchdog cuts the load 5 s after the last heartbeat it
// heard (protocol v1). The stated interval is the result's own k = 2 uncertainty (GUM).
describe('a cable pulled for longer than the rig watchdog, on the simulated rig', () => {
  it('the charge drawn until the watchdog cut the load is in the capacity and in its doubt, with an event each time', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'cv-unplug-'));
    const scenario = {
      ...pickScenario(loadScenarios(DEFAULT_SCENARIOS_PATH), 'quick'),
      cell: {
        chemistry: 'li-ion' as const,
        cells: 1,
        capacity_Ah: 0.012,
        initial_soc: 1,
        internal_ohm_per_cell: 0.12,
      },
    };
    const calPath = join(dir, 'cal.json');
    writeFileSync(calPath, JSON.stringify(referenceCalibration(scenario)));
    const clock = new VirtualClock(0, Date.UTC(2026, 11, 3, 9, 0, 0));
    const profile = await loadRigProfile(DEFAULT_RIG_PATH);
    const sim = new SimSource({ scenario, clock, profile });
    const cable = new CableSource(sim);
    const io = { out: new PassThrough(), err: new PassThrough() };
    io.out.resume();
    io.err.resume();
    const run = await startRun(
      {
        sim: 'quick',
        speed: 1,
        runs: dir,
        listen: null,
        once: true,
        rotateBytes: 1 << 24,
        channel: 0,
        linkTimeoutS: 60,
        calibration: calPath,
      },
      io,
      { source: cable, clock },
    );
    let ended = false;
    void run.done.then(() => (ended = true));
    const step = async (ms: number): Promise<void> => {
      for (let t = 0; t < ms && !ended; t += 100) {
        clock.advance(100);
        if (t % 1000 === 0) await new Promise((r) => setImmediate(r));
      }
    };
    // Two outages of 6.5 s with the load on; the run then goes on to its cutoff.
    for (const at of [8_000, 12_000]) {
      await step(at);
      expect(sim.rig.truth().loadOn).toBe(true);
      cable.unplug();
      await step(6_500);
      expect(sim.rig.truth().loadOn).toBe(false);
      cable.plugIn();
    }
    while (!ended) await step(1000);
    const { result } = await run.done;
    const truth = sim.rig.truth();
    const log = events(run.folder);
    const bridged = log.filter((e) => e.event === 'unlogged_discharge');
    expect(result.end_reason).toBe('cutoff');
    expect(bridged).toHaveLength(2);
    for (const b of bridged) expect(b['estimated_s']).toBeCloseTo(4.75, 2);
    // Each outage drew about 1 A for 4.5 to 5 s: some 1.3 mAh, a tenth of the cell.
    expect(result.bridged_Ah).toBeGreaterThan(0.002);
    const u = result.uncertainty.capacity_Ah;
    expect(u.terms.some((t) => t.name.startsWith('charge bridged'))).toBe(true);
    expect(Math.abs(result.capacity_Ah - truth.chargeAh)).toBeLessThanOrEqual(u.expanded);
    expect(Math.abs(result.capacity_Ah / truth.chargeAh - 1)).toBeLessThan(0.02);
  }, 60_000);
});
