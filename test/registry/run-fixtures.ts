/**
 * Run folders for registry tests: a result.json with the keys of docs/run-folder.md and a
 * cell_id, the way a finished run leaves it.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

export interface FixtureRun {
  cell_id?: string;
  started: string;
  capacity_Ah: number;
  /** Standard uncertainty of the capacity (k = 1). */
  u_Ah?: number;
  dc_resistance_ohm?: number | null;
  end_reason?: string;
  calibration_id?: string;
  duration_s?: number;
}

export function fixtureResult(r: FixtureRun): Record<string, unknown> {
  const u = r.u_Ah ?? r.capacity_Ah * 0.005;
  const duration = r.duration_s ?? 5 * 3600;
  return {
    capacity_Ah: r.capacity_Ah,
    energy_Wh: r.capacity_Ah * 3.6,
    duration_s: duration,
    end_reason: r.end_reason ?? 'cutoff',
    end_detail: '',
    load_off_confirmed: true,
    mean_voltage_V: 3.6,
    end_voltage_V: 3.0,
    cutoff_V: 3.0,
    open_circuit_V: 4.15,
    dc_resistance_ohm: r.dc_resistance_ohm === undefined ? 0.045 : r.dc_resistance_ohm,
    chemistry: 'li-ion',
    cells: 1,
    frames_accepted: 1000,
    frames_rejected: 0,
    frames_lost: 0,
    gaps: 0,
    bridged_Ah: 0,
    rig_clock_error_ppm: 120,
    rig_clock_warning: false,
    calibration_id: r.calibration_id ?? '0123456789abcdef',
    started_wall: r.started,
    ended_wall: new Date(Date.parse(r.started) + duration * 1000).toISOString(),
    schedule: null,
    service_output_h: null,
    uncertainty: {
      capacity_Ah: { standard: u, expanded: 2 * u, k: 2 },
      energy_Wh: { standard: u * 3.6, expanded: 7.2 * u, k: 2 },
    },
    ...(r.cell_id !== undefined ? { cell_id: r.cell_id } : {}),
  };
}

/** Writes runs/<stamp>-<cell>/result.json and returns the folder. */
export function writeFixtureRun(runsDir: string, r: FixtureRun, name?: string): string {
  const stamp = r.started.replace(/[-:]/g, '').replace('T', '-').slice(0, 15);
  const dir = join(runsDir, name ?? `${stamp}-${r.cell_id ?? 'anon'}`);
  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'result.json'), `${JSON.stringify(fixtureResult(r), null, 2)}\n`);
  return dir;
}
