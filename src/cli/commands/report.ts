import type { CommandModule } from 'yargs';
import { COMPARISON_FILE, reportRuns } from '../../report/report-runs.js';
import { progressBar } from '../progress.js';

interface ReportArgs {
  runs: string[];
  calibration: string | undefined;
  rated: number | undefined;
  step: number;
  out: string | undefined;
}

export const reportCommand: CommandModule<object, ReportArgs> = {
  command: 'report <runs..>',
  describe: 'Recompute run folders from their raw counts and write result files and an HTML report',
  builder: (y) =>
    y
      .positional('runs', {
        type: 'string',
        array: true,
        demandOption: true,
        describe: 'Run folders (several: also a comparison page)',
      })
      .option('calibration', {
        type: 'string',
        describe:
          "Apply this calibration file instead of each run's own; the original result is kept",
      })
      .option('rated', {
        type: 'number',
        describe:
          'Rated capacity of the cell in Ah: C-rate, share of the rating, standard-style check',
      })
      .option('step', {
        type: 'number',
        default: 0.05,
        describe: 'Voltage step per cell of the capacity-by-voltage table, V',
      })
      .option('out', {
        type: 'string',
        describe: `Report file: the run's report.html with one run, the comparison page with several (default ${COMPARISON_FILE})`,
      }),
  handler: async (args) => {
    const bar = progressBar(process.stderr);
    try {
      const outcome = await reportRuns({
        folders: args.runs,
        stepPerCellV: args.step,
        ...(args.calibration !== undefined ? { calibrationFile: args.calibration } : {}),
        ...(args.rated !== undefined ? { ratedAh: args.rated } : {}),
        ...(args.out !== undefined ? { out: args.out } : {}),
        onProgress: (i, n, done, total) =>
          bar.update(n > 1 ? `run ${i + 1} of ${n}` : 'reading samples', done, total),
      });
      bar.end();
      for (const r of outcome.runs) {
        const res = r.figures.result;
        const u = res.uncertainty.capacity_Ah.expanded;
        process.stdout.write(
          `${r.folder}: ${(res.capacity_Ah * 1000).toFixed(1)} mAh ± ${(u * 1000).toFixed(1)} mAh (k = 2), ${res.energy_Wh.toFixed(4)} Wh, calibration ${res.calibration_id}\n  wrote ${r.resultPath} and ${r.reportPath}\n`,
        );
        if (r.figures.verdict)
          process.stdout.write(`  ${r.figures.verdict.summary} (${r.figures.verdict.label})\n`);
      }
      if (outcome.comparisonPath) process.stdout.write(`comparison: ${outcome.comparisonPath}\n`);
    } finally {
      bar.end();
    }
  },
};
