import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

/** The built package, as `npm test` builds it first (pretest). */
const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));

// POSIX: SIGINT is what Ctrl-C sends to the foreground process (common practice). The README
// promises one Ctrl-C switches the load off, writes the result and exits 0, live page and all.
describe('Ctrl-C on a run with a live page, without --once', () => {
  it('one SIGINT: load off, result written as stopped, the program exits 0 by itself', async () => {
    expect(existsSync(CLI), 'build first: npm run build').toBe(true);
    const home = mkdtempSync(join(tmpdir(), 'cv-ctrlc-'));
    const child = spawn(
      process.execPath,
      [CLI, 'run', '--sim', 'demo', '--listen', '127.0.0.1:0', '--runs', join(home, 'runs')],
      { env: { ...process.env, CELLVIGIL_HOME: home }, stdio: ['ignore', 'pipe', 'pipe'] },
    );
    let out = '';
    child.stdout.on('data', (d: Buffer) => (out += d.toString()));
    child.stderr.on('data', (d: Buffer) => (out += d.toString()));
    const exit = new Promise<number | null>((r) => child.once('exit', (code) => r(code)));
    const until = Date.now() + 20_000;
    while (!/-> discharging/.test(out)) {
      if (Date.now() > until || child.exitCode !== null) throw new Error(`no discharge:\n${out}`);
      await new Promise((r) => setTimeout(r, 20));
    }
    child.kill('SIGINT');
    const timer = setTimeout(() => child.kill('SIGKILL'), 15_000);
    const code = await exit;
    clearTimeout(timer);
    expect(code, out).toBe(0);
    expect(out).toMatch(/SIGINT: switching the load off and finishing the run; cellvigil exits/);
    expect(out).toMatch(/Run ended: stopped/);
    expect(out).not.toMatch(/Ctrl-C to exit/);
  }, 40_000);
});
