/**
 * `npm run bench`: runs each benchmark in a fresh process (scripts/bench-<figure>.ts, compiled
 * to .bench/scripts/), prints one table of figures against their baselines and targets, and
 * writes bench-results.json with the machine. `npm run bench -- replay soak` runs only those.
 * Exits 1 when a target is missed or a benchmark fails. See docs/benchmarks.md.
 */
import { spawn } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, release, totalmem, type, arch, loadavg } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { fileURLToPath } from 'node:url';
import { BENCH_DIR, fmt, ROOT, type Figure } from './bench-kit.js';

const FIGURES = [
  'ingest',
  'replay',
  'fanout',
  'stalled',
  'soak',
  'accuracy',
  'registry',
  'fleet',
  'station',
] as const;
/** A benchmark that runs longer than this has hung. */
const TIMEOUT_MS = 300_000;

interface Outcome {
  figure: string;
  seconds: number;
  result: Figure | null;
  error: string | null;
}

/** A script reports one figure, or an array of them (the registry's four). */
async function runScript(name: string, outDir: string): Promise<Outcome[]> {
  const o = await runOne(name, outDir);
  const r = o.result as Figure | Figure[] | null;
  if (!Array.isArray(r)) return [o];
  return r.map((f) => ({
    figure: f.figure,
    seconds: o.seconds / r.length,
    result: f,
    error: null,
  }));
}

function runOne(name: string, outDir: string): Promise<Outcome> {
  const script = fileURLToPath(new URL(`./bench-${name}.js`, import.meta.url));
  const out = join(outDir, `${name}.json`);
  const t0 = performance.now();
  process.stderr.write(`bench: ${name}…\n`);
  return new Promise((resolve) => {
    const child = spawn(process.execPath, ['--expose-gc', script, '--out', out], {
      stdio: ['ignore', 'inherit', 'inherit'],
      cwd: ROOT,
    });
    const timer = setTimeout(() => child.kill('SIGKILL'), TIMEOUT_MS);
    child.on('exit', (code, signal) => {
      clearTimeout(timer);
      const seconds = (performance.now() - t0) / 1000;
      if (code !== 0)
        return resolve({
          figure: name,
          seconds,
          result: null,
          error: signal ? `killed by ${signal} after ${fmt(seconds, 0)} s` : `exit code ${code}`,
        });
      try {
        resolve({
          figure: name,
          seconds,
          result: JSON.parse(readFileSync(out, 'utf8')) as Figure,
          error: null,
        });
      } catch (e) {
        resolve({
          figure: name,
          seconds,
          result: null,
          error: `no result: ${(e as Error).message}`,
        });
      }
    });
  });
}

function table(rows: string[][]): string {
  const widths = rows[0]!.map((_, c) => Math.max(...rows.map((r) => r[c]!.length)));
  const line = (r: string[]): string => r.map((cell, c) => cell.padEnd(widths[c]!)).join('  ');
  return [
    line(rows[0]!),
    widths.map((w) => '-'.repeat(w)).join('  '),
    ...rows.slice(1).map(line),
  ].join('\n');
}

function machine(): Record<string, unknown> {
  const list = cpus();
  return {
    os: `${type()} ${release()}`,
    arch: arch(),
    cpus: list.length,
    cpu_model: list[0]?.model ?? 'unknown',
    memory_GB: Number((totalmem() / 2 ** 30).toFixed(1)),
    node: process.version,
    load_average_at_start: loadavg().map((x) => Number(x.toFixed(2))),
  };
}

async function main(): Promise<void> {
  const asked = process.argv.slice(2).filter((a) => !a.startsWith('-'));
  const unknown = asked.filter((a) => !(FIGURES as readonly string[]).includes(a));
  if (unknown.length > 0) {
    console.error(`bench: no figure ${unknown.join(', ')}; the figures are ${FIGURES.join(', ')}.`);
    process.exit(2);
  }
  const names = asked.length > 0 ? FIGURES.filter((f) => asked.includes(f)) : [...FIGURES];
  mkdirSync(BENCH_DIR, { recursive: true });
  const outDir = mkdtempSync(join(BENCH_DIR, 'results-'));
  const host = machine();
  const t0 = performance.now();
  const outcomes: Outcome[] = [];
  try {
    for (const name of names) outcomes.push(...(await runScript(name, outDir)));
  } finally {
    rmSync(outDir, { recursive: true, force: true });
  }
  const totalS = (performance.now() - t0) / 1000;
  const rows = [['figure', 'measured', 'baseline', 'ratio', 'target', 'result', 'time']];
  for (const o of outcomes) {
    const r = o.result;
    rows.push(
      r
        ? [
            r.figure,
            r.measuredText,
            r.baselineText,
            fmt(r.ratio, 3),
            r.target,
            r.pass ? 'pass' : 'FAIL',
            `${fmt(o.seconds, 0)} s`,
          ]
        : [o.figure, '-', '-', '-', '-', `ERROR (${o.error})`, `${fmt(o.seconds, 0)} s`],
    );
  }
  console.log(
    `\ncellvigil benchmarks on ${String(host['cpus'])} × ${String(host['cpu_model'])}, ${String(host['os'])}, Node ${process.version}\n`,
  );
  console.log(table(rows));
  console.log(`\ntotal ${fmt(totalS, 0)} s; results in bench-results.json`);
  writeFileSync(
    join(ROOT, 'bench-results.json'),
    `${JSON.stringify({ date: new Date().toISOString(), machine: host, total_s: Number(totalS.toFixed(1)), figures: outcomes.map((o) => ({ ...(o.result ?? { figure: o.figure, pass: false }), seconds: Number(o.seconds.toFixed(1)), error: o.error })) }, null, 2)}\n`,
  );
  if (outcomes.some((o) => !o.result?.pass)) process.exitCode = 1;
}

main().catch((e: unknown) => {
  console.error(`bench: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
