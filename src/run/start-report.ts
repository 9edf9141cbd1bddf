/**
 * What a run says when it starts and when it ends: the manifest it records, the banner and
 * cautions, the first events, and the summary printed after the result.
 */
import { programSummary } from './program-summary.js';
import { cautionLines } from '../chemistry/cautions.js';
import { ErrorCodes } from '../core/errors.js';
import { packageVersion } from '../core/paths.js';
import type { RunManifest } from '../record/manifest.js';
import type { RunResult } from '../record/result.js';
import { describeSchedule } from '../schedule/schedule.js';
import type { Source } from '../sources/source.js';
import type { ChannelOutcome, ChannelRun } from './channel-run.js';
import type { ResumePoint } from './resume.js';
import type { RunConfig } from './run-config.js';
import type { RunRequest } from './run-request.js';
import { formatElapsed, type StatusPrinter } from './status-line.js';

export function manifestOf(x: {
  req: RunRequest;
  cfg: RunConfig;
  label: string;
  startedWallMs: number;
  source: Source;
  calibrationId: string;
}): RunManifest {
  const { req, cfg, source } = x;
  const { chemistry, cutoff, scenario } = cfg;
  return {
    format: 'cellvigil-run',
    format_version: 1,
    cellvigil_version: packageVersion(),
    node_version: process.version,
    label: x.label,
    cell_id: cfg.cellId,
    started_wall: new Date(x.startedWallMs).toISOString(),
    source: {
      kind: source.kind === 'sim' ? 'sim' : 'serial',
      description: source.description,
      ...(scenario ? { scenario: scenario.name, speed: req.speed } : {}),
    },
    channel: req.channel,
    rig: { file: cfg.rigPath, profile: cfg.profile },
    calibration: { file: cfg.calibrationPath, id: x.calibrationId, content: cfg.calibration },
    chemistry: { id: chemistry.id, profile: chemistry },
    cells: cfg.cells,
    cutoff_V: cutoff.total,
    cutoff_per_cell_V: cutoff.perCell,
    cutoff_source: cutoff.source,
    floor_V: cfg.floorV,
    limits: { max_temperature_C: cfg.maxTemperatureC, max_current_A: cfg.maxCurrentA },
    samples: { prefix: 'samples-', rotate_bytes: req.rotateBytes },
    ...(cfg.scheduleSource && cfg.schedule
      ? { schedule: { ...cfg.scheduleSource, description: describeSchedule(cfg.schedule) } }
      : {}),
    ...(cfg.program
      ? {
          program: {
            name: cfg.program.plan.name,
            file: cfg.program.where,
            text: cfg.program.text,
            plan: cfg.program.plan,
          },
        }
      : {}),
  };
}

/** The banner, the cautions and the run's first events: cautions first, then the rig. */
export function announceStart(
  run: ChannelRun,
  status: StatusPrinter,
  x: { cfg: RunConfig; folder: string; source: string; resume: ResumePoint | null },
): void {
  const { cfg, resume } = x;
  const { chemistry, cells, cutoff } = cfg;
  status.line(
    `cellvigil ${packageVersion()}: ${cells} × ${chemistry.id} on ${x.source}; cutoff ${cutoff.total.toFixed(3)} V (${cutoff.perCell} V per cell, ${cutoff.source}), limit ${cfg.maxTemperatureC} °C.`,
  );
  if (cfg.schedule) status.line(`Schedule: ${describeSchedule(cfg.schedule)}.`);
  status.line('Cautions:');
  for (const c of cautionLines(chemistry)) status.line(`  - ${c}`);
  if (resume) {
    const downS = Math.max(0, Date.now() - resume.lastWallMs) / 1000;
    status.line(
      `Resuming an interrupted run: ${(resume.totals.chargeAh * 1000).toFixed(1)} mAh so far from ${resume.rows} logged rows; down for ${downS.toFixed(0)} s. The precheck runs again before the load goes back on.`,
    );
    run.log({
      event: 'resumed',
      rows: resume.rows,
      charge_Ah: resume.totals.chargeAh,
      energy_Wh: resume.totals.energyWh,
      down_s: downS,
      cut_bytes: resume.cutBytes,
      source: x.source,
    });
  } else {
    run.log({
      event: 'run_started',
      source: x.source,
      chemistry: chemistry.id,
      cells,
      cutoff_V: cutoff.total,
      version: packageVersion(),
    });
  }
  run.log({ event: 'cautions', lines: cautionLines(chemistry) });
  announceCalibration(run, status, cfg);
}

function announceCalibration(run: ChannelRun, status: StatusPrinter, cfg: RunConfig): void {
  if (cfg.calibration) {
    run.log({
      event: 'calibration',
      id: cfg.calibration.id,
      file: cfg.calibrationPath,
      date: cfg.calibration.date,
    });
    return;
  }
  run.log({ event: 'calibration', id: 'none', note: 'no calibration: nominal analog chain only' });
  status.line(
    'No calibration given: figures use the nominal analog chain, whose offset and gain errors are unknown (see `cellvigil calibrate`).',
  );
}

export interface SummaryIo {
  out: NodeJS.WritableStream;
  err: NodeJS.WritableStream;
}

/**
 * The end of a run in a few lines. A refused run says why once, as an error: it measured
 * nothing, so it has no figures to show (and `folderKept` says whether its folder stays).
 */
export function printSummary(
  io: SummaryIo,
  end: ChannelOutcome,
  folder: string,
  calibrated: boolean,
  folderKept = true,
): void {
  const r: RunResult = end.result;
  const w = (s: string): boolean => io.out.write(`${s}\n`);
  w('');
  if (r.end_reason === 'refused') {
    const code = end.rigNeverSpoke ? ErrorCodes.RIG_SILENT : ErrorCodes.PRECHECK_REFUSED;
    // A program refused for what the rig lacks carries the protocol's own code already.
    const own = /^CV_[A-Z_]+: /.test(r.end_detail);
    io.err.write(`cellvigil: ${own ? '' : `${code}: `}${r.end_detail}\n`);
    w(
      folderKept
        ? `Run refused before the load went on; its record: ${folder}`
        : 'Run refused before the load went on; no run folder was kept.',
    );
    return;
  }
  w(
    `Run ended: ${r.end_reason} (${r.end_detail})${r.load_off_confirmed ? '' : ' — load-off NOT confirmed by the rig; its watchdog cuts the load within 5 s'}`,
  );
  for (const line of programSummary(r)) w(line);
  const u = r.uncertainty.capacity_Ah;
  w(
    `  capacity      ${(r.capacity_Ah * 1000).toFixed(1)} mAh ± ${(u.expanded * 1000).toFixed(1)} mAh (k = 2)`,
  );
  w(
    `  energy        ${r.energy_Wh.toFixed(4)} Wh ± ${r.uncertainty.energy_Wh.expanded.toFixed(4)} Wh (k = 2)`,
  );
  w(
    `  load on       ${formatElapsed(r.duration_s)}; mean ${r.mean_voltage_V?.toFixed(3) ?? '—'} V, end ${r.end_voltage_V?.toFixed(3) ?? '—'} V, cutoff ${r.cutoff_V.toFixed(3)} V`,
  );
  w(`  DC resistance ${dcResistanceText(r)}`);
  w(
    `  frames        ${r.frames_accepted} accepted, ${r.frames_rejected} rejected, ${r.frames_lost} lost`,
  );
  w(
    `  rig clock     ${r.rig_clock_error_ppm === null ? 'too short a run to estimate' : `${r.rig_clock_error_ppm} ppm${r.rig_clock_warning ? ' (more than 1 %; the host clock was used)' : ''}`}`,
  );
  w(`  calibration   ${r.calibration_id}${calibrated ? '' : ' (nominal chain)'}`);
  if (end.diskError)
    io.err.write(
      `cellvigil: ${ErrorCodes.RUN_FOLDER}: ${end.diskError.message} (${folder}). Free space or fix permissions; the load was switched off.\n`,
    );
  w(`  run folder    ${folder}`);
}

/** DC internal resistance at switch-on, in mΩ, with the voltages it comes from. */
function dcResistanceText(r: RunResult): string {
  if (r.dc_resistance_ohm === null) return '— (no loaded frame after a resting one)';
  const mOhm = r.dc_resistance_ohm * 1000;
  const from =
    r.open_circuit_V !== null ? ` (from ${r.open_circuit_V.toFixed(3)} V open-circuit)` : '';
  return `${mOhm.toFixed(mOhm < 100 ? 1 : 0)} mΩ at switch-on${from}`;
}
