/**
 * One program per port. Two runs on one pseudo-terminal (socat) would each read part of the
 * byte stream; the second is refused, named after the first. A lock whose process is gone is
 * taken over (a process that no longer exists answers signal 0 with ESRCH: POSIX kill(2)).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, symlinkSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { lockPathFor, lockPort } from '../../src/sources/port-lock.js';
import { SerialSource } from '../../src/sources/serial-source.js';

const handlers = { line: () => undefined, overlong: () => undefined, closed: () => undefined };

let dir: string;
let socat: ChildProcess | null = null;
let child: ChildProcess | null = null;
beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'cellvigil-lock-'));
});
afterEach(async () => {
  for (const p of [child, socat]) if (p && p.exitCode === null && p.signalCode === null) p.kill();
  child = socat = null;
  rmSync(dir, { recursive: true, force: true });
});

async function waitFor(cond: () => boolean, what: string): Promise<void> {
  const until = Date.now() + 5000;
  while (!cond()) {
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

async function pty(): Promise<string> {
  const host = join(dir, 'host');
  socat = spawn(
    'socat',
    [`pty,raw,echo=0,link=${host}`, `pty,raw,echo=0,link=${join(dir, 'rig')}`],
    {
      stdio: 'ignore',
    },
  );
  await waitFor(() => existsSync(host), 'socat');
  return host;
}

async function refused(p: Promise<unknown>): Promise<CellvigilError> {
  const e = await p.then(
    () => null,
    (err: unknown) => err,
  );
  expect(e).toBeInstanceOf(CellvigilError);
  return e as CellvigilError;
}

describe('port lock', () => {
  it('refuses a second source on the same pty, by another name too, naming the first; free again after close', async () => {
    const host = await pty();
    const alias = join(dir, 'alias');
    symlinkSync(host, alias);
    const first = new SerialSource({
      path: host,
      holder: 'run 20261203-081000-cell-07',
      lockDir: dir,
    });
    await first.open(handlers);
    const second = new SerialSource({ path: alias, holder: 'run other', lockDir: dir });
    const e = await refused(second.open(handlers));
    expect(e.code).toBe(ErrorCodes.PORT_BUSY);
    expect(e.message).toContain(`pid ${process.pid}, run 20261203-081000-cell-07`);
    expect(e.message).toContain(`--port ${alias}`);
    await first.close();
    expect(existsSync(lockPathFor(host, dir))).toBe(false);
    await second.open(handlers);
    await second.close();
  });

  it('names a run held by another process, and takes over its lock once that process is gone', async () => {
    const host = await pty();
    const lockFile = lockPathFor(host, dir);
    // Another process holds the lock, as a running `cellvigil run` would.
    child = spawn(
      process.execPath,
      [
        '-e',
        `require('fs').writeFileSync(${JSON.stringify(lockFile)}, JSON.stringify({pid: process.pid, port: 'x', holder: 'run 20261203-070000-pack-b', since: 'then'})); setInterval(() => {}, 1000);`,
      ],
      { stdio: 'ignore' },
    );
    await waitFor(() => existsSync(lockFile), 'the other process');
    const pid = child.pid!;
    const e = await refused(new SerialSource({ path: host, lockDir: dir }).open(handlers));
    expect(e.code).toBe(ErrorCodes.PORT_BUSY);
    expect(e.message).toContain(`pid ${pid}, run 20261203-070000-pack-b`);
    child.kill('SIGKILL');
    await new Promise((r) => child!.once('exit', r));
    // The lock file stays behind after a kill; its pid is dead, so it is taken over.
    expect(existsSync(lockFile)).toBe(true);
    const lock = lockPort(host, 'run new', dir);
    expect(JSON.parse(readFileSync(lockFile, 'utf8')).pid).toBe(process.pid);
    lock.release();
    expect(existsSync(lockFile)).toBe(false);
  });

  it('a port that fails to open leaves no lock behind', async () => {
    const e = await refused(
      new SerialSource({ path: join(dir, 'no-such-port'), lockDir: dir }).open(handlers),
    );
    expect(e.code).toBe(ErrorCodes.PORT_OPEN);
    expect(existsSync(lockPathFor(join(dir, 'no-such-port'), dir))).toBe(false);
  });
});
