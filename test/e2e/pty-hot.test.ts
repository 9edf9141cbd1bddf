import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { onlyRunFolder, readJson, startDaemon, startPtyRig, type PtyRig } from './pty-helpers.js';

// A cell boxed in with its load resistor: its temperature climbs past the Li-ion limit of
// 60 °C (common practice) long before the cutoff.
describe('end to end over a pseudo-terminal: over-temperature', () => {
  let rig: PtyRig;
  let exitCode: number | null;
  let result: { end_reason: string; load_off_confirmed: boolean; capacity_Ah: number };

  beforeAll(async () => {
    rig = await startPtyRig('hot');
    const runs = join(rig.dir, 'runs');
    const d = startDaemon([
      '--port',
      rig.hostPath,
      '--chemistry',
      'li-ion',
      '--once',
      '--no-live',
      '--runs',
      runs,
    ]);
    exitCode = await d.exit;
    await new Promise((r) => setTimeout(r, 500));
    result = readJson(join(onlyRunFolder(runs), 'result.json'));
  }, 120_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('ends with over_temperature and exit code 3', () => {
    expect(result.end_reason).toBe('over_temperature');
    expect(exitCode).toBe(3);
  });

  it('switched the load off (seen on the rig side) and confirmed it', () => {
    const t = rig.readTruth();
    expect(t.truth.loadOn).toBe(false);
    expect(t.load_log.at(-1)).toMatchObject({ on: false, cause: 'host' });
    expect(result.load_off_confirmed).toBe(true);
    // Tripped at the limit: the cell is hot, but not far beyond 60 °C.
    expect(t.truth.temperatureC).toBeGreaterThan(59);
    expect(t.truth.temperatureC).toBeLessThan(64);
  });
});
