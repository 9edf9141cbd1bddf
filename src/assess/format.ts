/** Plain-text layout of an assess report. */
import type { AssessReport } from './assess.js';
import { FLOOR_SHARE } from './current-floor.js';

function p3(x: number): string {
  return Number(x.toPrecision(3)).toString();
}

/** Amps as mA below 1 A, as A above. */
function amps(a: number): string {
  return Math.abs(a) < 1 ? `${p3(a * 1000)} mA` : `${p3(a)} A`;
}

function row(label: string, text: string): string {
  return `  ${label.padEnd(26)}${text}`;
}

const MODE_TEXT = {
  calibration_file: 'with the calibration file given',
  reference_meter: 'calibrated against the reference meter given',
  uncalibrated: 'uncalibrated',
} as const;

/** What one ADC count is worth on each channel. */
function resolutionLines(c: AssessReport['chain']): string[] {
  const out: string[] = [];
  out.push('Resolution: what one ADC count is worth');
  out.push(row('ADC', `${c.adc_bits} bits, ${p3(c.adc_V_per_count * 1000)} mV per count`));
  out.push(
    row(
      'voltage',
      `${p3(c.volts_per_count * 1000)} mV per count, full scale ${p3(c.full_scale_V)} V`,
    ),
  );
  out.push(
    row(
      'current',
      `${p3(c.amps_per_count * 1000)} mA per count, full scale ${p3(c.full_scale_A)} A (amplifier gain ${p3(c.amplifier_gain)})`,
    ),
  );
  out.push(
    row(
      'temperature',
      c.degrees_per_count.map((d) => `${p3(d.per_count)} °C at ${d.celsius} °C`).join(', '),
    ),
  );
  return out;
}

/** The current channel's errors before calibration. */
function frontEndLines(fe: AssessReport['front_end']): string[] {
  const out: string[] = [];
  out.push('Current channel before calibration');
  out.push(
    row(
      'op-amp input offset',
      fe.offset_A !== undefined
        ? `reads ${amps(fe.offset_A)} with no current (${p3(fe.offset_counts!)} counts): input_offset_V / shunt_ohm`
        : 'not in the rig profile (current.input_offset_V)',
    ),
  );
  out.push(
    row(
      'shunt connection',
      fe.connection_gain_error !== undefined
        ? `reads ${p3(fe.connection_gain_error * 100)} % high: connection_ohm / shunt_ohm`
        : 'not in the rig profile (current.connection_ohm)',
    ),
  );
  out.push('  A calibration against a reference meter removes both.');
  return out;
}

/** The smallest current worth measuring. */
function floorLines(f: AssessReport['smallest_current']): string[] {
  const out: string[] = [];
  out.push('Smallest current worth measuring');
  const pct = FLOOR_SHARE * 100;
  out.push(
    row(
      'calibrated',
      `${amps(f.calibrated_A)} (one count is ${pct} % of the reading at ${amps(f.resolution_floor_A)})`,
    ),
  );
  out.push(
    row(
      'uncalibrated',
      f.uncalibrated_floor_A !== undefined
        ? `${amps(f.uncalibrated_A)} (the offset is ${pct} % of the reading at ${amps(f.uncalibrated_floor_A)})`
        : amps(f.uncalibrated_A),
    ),
  );
  if (f.dead_zone_A !== undefined) {
    out.push(
      row(
        'dead zone',
        `below ${amps(f.dead_zone_A)} if the offset is negative: a single-supply stage then reads 0, and no calibration brings it back`,
      ),
    );
  }
  return out;
}

/** A planned capacity test's uncertainty budget (GUM, JCGM 100:2008). */
function testLines(t: NonNullable<AssessReport['test']>): string[] {
  const out: string[] = [];
  out.push(
    `Capacity test: ${p3(t.current_A)} A for ${p3(t.hours)} h = ${p3(t.capacity_Ah)} Ah, ${MODE_TEXT[t.mode]} (GUM, JCGM 100:2008)`,
  );
  out.push(`  ${'term'.padEnd(44)}${'u (Ah)'.padStart(10)}${'u (%)'.padStart(9)}  basis`);
  for (const term of t.terms) {
    out.push(
      `  ${term.term.padEnd(44)}${p3(term.u_Ah).padStart(10)}${p3((100 * term.u_Ah) / t.capacity_Ah).padStart(9)}  ${term.basis}`,
    );
  }
  out.push(
    `  ${'combined standard uncertainty'.padEnd(44)}${p3(t.combined_u_Ah).padStart(10)}${p3((100 * t.combined_u_Ah) / t.capacity_Ah).padStart(9)}`,
  );
  out.push(
    `  ${'expanded uncertainty, k = 2'.padEnd(44)}${`±${p3(t.expanded_U_Ah)}`.padStart(10)}${`±${p3(100 * t.expanded_relative)}`.padStart(9)}`,
  );
  if (t.rig_clock) {
    out.push(
      `  Timed by the rig's own oscillator (±${p3(t.rig_clock.tolerance * 100)} %) instead of the host clock, the charge could be off by up to ` +
        `±${p3(t.rig_clock.half_width_Ah)} Ah (±${p3(t.rig_clock.tolerance * 100)} %); cellvigil times frames by the host.`,
    );
  }
  return out;
}

export function formatAssess(r: AssessReport): string {
  const out: string[] = [];
  out.push(`Rig profile ${r.rig.file}${r.rig.name ? ` (${r.rig.name})` : ''}`);
  out.push('');
  out.push(...resolutionLines(r.chain));
  out.push('');
  out.push(...frontEndLines(r.front_end));
  out.push('');
  out.push(...floorLines(r.smallest_current));
  if (r.test) {
    out.push('');
    out.push(...testLines(r.test));
  }
  if (r.warnings.length > 0) out.push('');
  for (const w of r.warnings) out.push(`warning: ${w}`);
  return out.join('\n');
}
