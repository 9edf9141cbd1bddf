/**
 * One program per serial port: two runs reading the same port would each get part of the
 * byte stream. serialport's own lock (flock) keeps a second open out but cannot say who holds
 * the port; this lock file beside it names the holder (pid, command, run), so the refusal can.
 * A lock left by a process that no longer exists is taken over.
 */
import { closeSync, openSync, readFileSync, realpathSync, rmSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';

export interface PortLockHolder {
  pid: number;
  port: string;
  /** What holds it: the run (folder or label) when known, else the command line. */
  holder: string;
  since: string;
}

export interface PortLock {
  readonly path: string;
  release(): void;
}

/** The lock file for a port: one per device, whatever name (a symlink, say) it was opened by. */
export function lockPathFor(port: string, dir = tmpdir()): string {
  let real: string;
  try {
    real = realpathSync(port);
  } catch {
    real = resolve(port);
  }
  return join(dir, `cellvigil-port${real.replace(/[^A-Za-z0-9._-]/g, '_')}.lock`);
}

function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    // EPERM: the process exists but belongs to someone else.
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

function readHolder(path: string): PortLockHolder | null {
  try {
    const data = JSON.parse(readFileSync(path, 'utf8')) as Partial<PortLockHolder>;
    return typeof data.pid === 'number' ? (data as PortLockHolder) : null;
  } catch {
    return null;
  }
}

/**
 * Takes the port's lock or throws CV_PORT_BUSY naming the process that holds it. `holder`
 * describes this process for a second one to read.
 */
export function lockPort(port: string, holder: string, dir = tmpdir()): PortLock {
  const path = lockPathFor(port, dir);
  const mine: PortLockHolder = { pid: process.pid, port, holder, since: new Date().toISOString() };
  for (let attempt = 0; attempt < 3; attempt++) {
    let fd: number;
    try {
      fd = openSync(path, 'wx', 0o644);
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
      const other = readHolder(path);
      if (other && alive(other.pid)) {
        throw makeError(
          ErrorCodes.PORT_BUSY,
          `the port is in use by another cellvigil: pid ${other.pid}, ${other.holder}, since ${other.since}`,
          `--port ${port}`,
          `Two programs on one port would each get part of the rig's lines. Wait for that run to end, stop it (Ctrl-C in its terminal, or the stop button of its live page), or give another --port. The lock is ${path}.`,
        );
      }
      // Left by a process that is gone (or unreadable, half written): take it over.
      rmSync(path, { force: true });
      continue;
    }
    try {
      writeSync(fd, `${JSON.stringify(mine)}\n`);
    } finally {
      closeSync(fd);
    }
    return { path, release: () => releaseIfMine(path) };
  }
  throw makeError(
    ErrorCodes.PORT_BUSY,
    'the port lock could not be taken',
    path,
    'Another program keeps creating it; check what else opens this port.',
  );
}

function releaseIfMine(path: string): void {
  if (readHolder(path)?.pid === process.pid) rmSync(path, { force: true });
}
