/**
 * report.html of a program run: its steps, the capacity of each cycle with its uncertainty and
 * the cycle-to-cycle trend, from a result.json written here in the documented shape.
 */
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type {
  CycleFigures,
  CycleTrendFigures,
  RunResult,
  SegmentFigures,
} from '../../src/record/result.js';
import { openRunFolder } from '../../src/replay/run-folder.js';
import { capacityTrend } from '../../src/report/cycle-trend.js';
import { renderRunReport } from '../../src/report/html.js';
import { programSection } from '../../src/report/html-cycles.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { simulateRun, demoScenario } from './sim-run.js';

const roots: string[] = [];
afterAll(async () => {
  for (const r of roots) await rm(r, { recursive: true, force: true });
});

const fig = (expanded: number) => ({
  standard: expanded / 2,
  expanded,
  k: 2 as const,
  basis: 'test',
  terms: [],
});

const T0 = Date.UTC(2026, 4, 1, 8, 0, 0);

/** Three cycles of charge, rest, discharge at 0.5 A, then a storage charge. */
function programFigures(capacities: number[]): {
  segments: SegmentFigures[];
  cycles: CycleFigures[];
} {
  const segments: SegmentFigures[] = [];
  const cycles: CycleFigures[] = [];
  let t = T0;
  const add = (
    kind: SegmentFigures['kind'],
    cycle: number | null,
    hours: number,
    charge: number,
    end: string,
    purpose: SegmentFigures['purpose'] = 'program',
  ): number => {
    const index = segments.length;
    segments.push({
      index,
      kind,
      purpose,
      step: purpose === 'storage' ? 'storage' : kind,
      cycle,
      started_ms: t,
      ended_ms: t + hours * 3600_000,
      end_reason: end,
      setpoint: kind === 'rest' ? {} : { current_A: 0.5 },
      duration_s: hours * 3600,
      charge_Ah: charge,
      energy_Wh: charge * 3.7,
      mean_current_A: kind === 'rest' ? null : 0.5,
      end_voltage_V: kind === 'discharge' ? 3.0 : 4.2,
      uncertainty: { charge_Ah: fig(0.02), energy_Wh: fig(0.08) },
    });
    t += hours * 3600_000;
    return index;
  };
  capacities.forEach((cap, k) => {
    add('charge', k + 1, 5.5, cap * 1.01, 'termination_current');
    add('rest', k + 1, 1, 0, 'rest_time');
    const seg = add('discharge', k + 1, cap / 0.5, cap, 'cutoff');
    cycles.push({
      cycle: k + 1,
      segment: seg,
      capacity_Ah: cap,
      energy_Wh: cap * 3.7,
      mean_current_A: 0.5,
      uncertainty: { capacity_Ah: fig(0.02), energy_Wh: fig(0.08) },
      of_first: cap / capacities[0]!,
    });
  });
  add('charge', null, 2, 1.0, 'storage_voltage', 'storage');
  return { segments, cycles };
}

function trendOf(cycles: readonly CycleFigures[]): CycleTrendFigures {
  const t = capacityTrend(
    cycles.map((c) => ({
      segment: {
        index: c.segment,
        kind: 'discharge' as const,
        purpose: 'program' as const,
        cycle: c.cycle,
        end_reason: 'cutoff' as const,
      },
      capacityAh: c.capacity_Ah,
      expandedAh: c.uncertainty.capacity_Ah.expanded,
    })),
  );
  return {
    slope_Ah_per_cycle: t.slopeAhPerCycle,
    slope_share_per_cycle: t.slopeShare,
    change_Ah: t.changeAh,
    change_beyond_uncertainty: t.changeBeyondUncertainty,
  };
}

function programResult(capacities: number[]): RunResult {
  const { segments, cycles } = programFigures(capacities);
  return {
    capacity_Ah: capacities.at(-1) ?? 0,
    program: 'three-cycles',
    segments,
    cycles,
    cycle_trend: cycles.length > 1 ? trendOf(cycles) : null,
  } as unknown as RunResult;
}

/** The text of every cell of a table's rows, tags stripped. */
function rows(html: string, table: string): string[][] {
  const body = new RegExp(`data-table="${table}">[\\s\\S]*?<tbody>([\\s\\S]*?)</tbody>`).exec(
    html,
  )![1]!;
  return [...body.matchAll(/<tr[^>]*>([\s\S]*?)<\/tr>/g)].map((m) =>
    [...m[1]!.matchAll(/<td[^>]*>([\s\S]*?)<\/td>/g)].map((c) => c[1]!),
  );
}

describe('the program section of report.html', () => {
  const html = programSection(programResult([2.5, 2.47, 2.45]));

  it('lists every step in the order it ran, with its charge and how it ended', () => {
    const steps = rows(html, 'segments');
    expect(steps).toHaveLength(10);
    expect(steps.map((r) => [r[0], r[1], r[3], r[6]])).toEqual([
      ['0', '1', 'charge', 'termination_current'],
      ['1', '1', 'rest', 'rest_time'],
      ['2', '1', 'discharge', 'cutoff'],
      ['3', '2', 'charge', 'termination_current'],
      ['4', '2', 'rest', 'rest_time'],
      ['5', '2', 'discharge', 'cutoff'],
      ['6', '3', 'charge', 'termination_current'],
      ['7', '3', 'rest', 'rest_time'],
      ['8', '3', 'discharge', 'cutoff'],
      ['9', '—', 'charge (storage)', 'storage_voltage'],
    ]);
    // The second charge starts after 5.5 h + 1 h + 2.5 Ah at 0.5 A = 11.5 h.
    expect(steps[3]![4]).toBe('11:30:00');
    expect(steps[2]![7]).toBe('out 2.5000 ± 0.0200');
    expect(steps[0]![7]).toBe('in 2.5250 ± 0.0200');
  });

  it('shows each cycle’s capacity with its expanded uncertainty and its share of the first', () => {
    expect(rows(html, 'cycles').map((r) => [r[0], r[1], r[2], r[3]])).toEqual([
      ['1', '2', '2.5000 ± 0.0200', '100.0 %'],
      ['2', '5', '2.4700 ± 0.0200', '98.8 %'],
      ['3', '8', '2.4500 ± 0.0200', '98.0 %'],
    ]);
    expect(html).toContain(
      'The figures at the top are those of the last full cycle (cycle 3, step 8).',
    );
  });

  // Ordinary least squares over (1, 2.50), (2, 2.47), (3, 2.45): slope = Σ(x−x̄)(y−ȳ) / Σ(x−x̄)²
  // = (−1·0.026667 + 1·(−0.023333)) / 2 = −0.025 Ah per cycle (textbook formula, worked by hand).
  it('states the trend: least-squares slope, change, and whether it exceeds the uncertainty', () => {
    expect(html).toContain('<strong>-25.00 mAh per cycle</strong>');
    // The fitted first cycle is 2.49833 Ah: −0.025 / 2.49833 = −1.001 % per cycle.
    expect(html).toContain('(-1.001 % of the first cycle per cycle)');
    // 50 mAh against √(20² + 20²) = 28.3 mAh combined expanded uncertainty.
    expect(html).toContain('Last cycle minus first: -50.00 mAh, larger than');
    expect(html).toContain('<svg');
    expect(html).toContain('least-squares trend');
  });

  it('says a trend needs two cycles, and a program without a full cycle has none', () => {
    expect(programSection(programResult([2.5]))).toContain('1 full cycle: a trend needs two.');
    const none = programSection(programResult([]));
    expect(none).toContain('No discharge reached its cutoff, so the figures at the top are zero.');
    expect(none).not.toContain('data-table="cycles"');
  });

  it('a change within the uncertainties is said to show none', () => {
    const flat = programSection(programResult([2.5, 2.49]));
    // 10 mAh against 28.3 mAh combined.
    expect(flat).toContain('within the two cycles’ expanded uncertainties combined');
  });
});

describe('report.html of a run', () => {
  it('has the program section for a program run only', async () => {
    const root = await mkdtemp(join(tmpdir(), 'cv-program-report-'));
    roots.push(root);
    const sim = await simulateRun({ dir: join(root, 'run'), scenario: demoScenario() });
    const f = await recomputeRun(await openRunFolder(sim.folder));
    const plain = renderRunReport(f, { generatedAt: '2026-06-01T00:00:00Z' });
    expect(plain).not.toContain('id="program"');
    const program = programResult([2.5, 2.47]);
    const withProgram = renderRunReport(
      { ...f, result: { ...f.result, ...program, capacity_Ah: f.result.capacity_Ah } },
      { generatedAt: '2026-06-01T00:00:00Z' },
    );
    expect(withProgram).toContain('<section id="program">');
    expect(withProgram.indexOf('id="program"')).toBeLessThan(withProgram.indexOf('id="verdict"'));
    // Everything else on the page is as it was.
    expect(withProgram.replace(/<section id="program">[\s\S]*?<\/section>\n/, '')).toBe(plain);
  });
});
