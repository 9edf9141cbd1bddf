import { randomBytes, timingSafeEqual, createHash } from 'node:crypto';
import {
  chmodSync,
  closeSync,
  fsyncSync,
  lstatSync,
  mkdirSync,
  openSync,
  readFileSync,
  renameSync,
  statSync,
  writeSync,
  type Stats,
} from 'node:fs';
import { homedir } from 'node:os';
import { dirname, join } from 'node:path';
import { Ajv } from 'ajv';
import { ErrorCodes, makeError, type ErrorCode } from '../core/errors.js';

/** The two live-feed tokens: control switches the run, viewer only watches it. */
export interface LiveTokens {
  control: string;
  /** Needed to watch when the feed is bound beyond loopback; null when none is available. */
  viewer: string | null;
}

export interface TokenFile {
  path: string;
  tokens: { control: string; viewer: string };
  /** True when this call made the tokens: print them once, they are not shown again. */
  generated: boolean;
}

const TOKEN_FILE_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  required: ['v', 'control', 'viewer', 'created'],
  properties: {
    v: { const: 1 },
    control: { type: 'string', pattern: '^[0-9a-f]{64}$' },
    viewer: { type: 'string', pattern: '^[0-9a-f]{64}$' },
    created: { type: 'string' },
  },
} as const;

const validateTokenFile = new Ajv({ strict: true }).compile<{
  v: 1;
  control: string;
  viewer: string;
  created: string;
}>(TOKEN_FILE_SCHEMA);

/** `$CELLVIGIL_HOME`, else `$XDG_CONFIG_HOME/cellvigil`, else `~/.config/cellvigil`. */
export function configDir(env: NodeJS.ProcessEnv = process.env): string {
  if (env.CELLVIGIL_HOME) return env.CELLVIGIL_HOME;
  if (env.XDG_CONFIG_HOME) return join(env.XDG_CONFIG_HOME, 'cellvigil');
  return join(homedir(), '.config', 'cellvigil');
}

function newToken(): string {
  return randomBytes(32).toString('hex');
}

/** What an owner-only file is called in messages, the error code, and the way out when others can read it. */
export interface PrivateFileKind {
  what: string;
  /** The folder it lives in, as messages name it. */
  folder: string;
  code: ErrorCode;
  /** Said after the chmod advice, e.g. "or delete it to have new tokens made". */
  otherwise: string;
  /** The way out when the file is not a plain file of ours. */
  remake: string;
}

const TOKEN_FILE_KIND: PrivateFileKind = {
  what: 'the live-feed token file',
  folder: 'the live-feed token folder',
  code: ErrorCodes.TOKEN_FILE,
  otherwise: 'or delete it to have new tokens made',
  remake: 'Delete it to have new tokens made (they are made owner-only).',
};

function unreadable(path: string, e: unknown, kind: PrivateFileKind): Error {
  return makeError(
    kind.code,
    `cannot read ${kind.what}: ${(e as Error).message}`,
    path,
    'Check the file and folder permissions.',
  );
}

/** The user running the daemon, or null where ownership cannot be checked (Windows). */
function ownUid(): number | null {
  return process.platform === 'win32' || typeof process.getuid !== 'function'
    ? null
    : process.getuid();
}

function refused(kind: PrivateFileKind, path: string, what: string, fix: string): Error {
  return makeError(kind.code, what, path, fix);
}

/**
 * Refuses a folder in which someone else could have put or swapped the token file: one owned
 * by another user (root excepted, who can do anything anyway), or one that the group or others
 * may write to, unless its sticky bit is set (as on /tmp: there only a file's owner may rename
 * or delete it, and the file's own owner is checked as well).
 */
function checkFolder(dir: string, st: Stats, uid: number, kind: PrivateFileKind): void {
  if (st.uid !== uid && st.uid !== 0)
    throw refused(
      kind,
      dir,
      `${kind.folder} belongs to another user (uid ${st.uid}), who could place tokens in it`,
      'Use a folder of your own: set CELLVIGIL_HOME, or fix the owner of this one.',
    );
  const sticky = (st.mode & 0o1000) !== 0;
  if ((st.mode & 0o022) !== 0 && !sticky)
    throw refused(
      kind,
      dir,
      `${kind.folder} can be written by other users (mode ${(st.mode & 0o777).toString(8)}), who could place tokens in it`,
      `Run chmod go-w '${dir}' (or chmod 700), or set CELLVIGIL_HOME to a folder of your own.`,
    );
}

/** Refuses a token file that is not a plain file of ours, or that others can read or change. */
function checkFile(path: string, st: Stats, uid: number | null, kind: PrivateFileKind): void {
  if (!st.isFile())
    throw refused(
      kind,
      path,
      `${kind.what} is not a regular file (a link or a device)`,
      kind.remake,
    );
  if (uid !== null && st.uid !== uid)
    throw refused(
      kind,
      path,
      `${kind.what} belongs to another user (uid ${st.uid}), who could have chosen its tokens`,
      kind.remake,
    );
  if (uid !== null && (st.mode & 0o077) !== 0)
    throw refused(
      kind,
      path,
      `${kind.what} can be read or changed by other users (mode ${(st.mode & 0o777).toString(8)})`,
      `Run chmod 600 '${path}' if nobody else could have read it, ${kind.otherwise}.`,
    );
}

/** The folder's status, or null when it does not exist yet; an unsafe folder is refused. */
function safeFolder(dir: string, kind: PrivateFileKind): Stats | null {
  let st: Stats;
  try {
    st = statSync(dir);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw unreadable(dir, e, kind);
  }
  const uid = ownUid();
  if (uid !== null) checkFolder(dir, st, uid, kind);
  return st;
}

/** The file's text, or null when there is none; refuses a file someone else could have placed or read. */
export function readPrivateFile(
  path: string,
  kind: PrivateFileKind = TOKEN_FILE_KIND,
): string | null {
  if (safeFolder(dirname(path), kind) === null) return null;
  let st: Stats;
  try {
    st = lstatSync(path);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw unreadable(path, e, kind);
  }
  checkFile(path, st, ownUid(), kind);
  try {
    return readFileSync(path, 'utf8');
  } catch (e) {
    throw unreadable(path, e, kind);
  }
}

/**
 * Reads the tokens from `<dir>/tokens.json`, making both on first use. A folder it makes is 0700
 * and the file 0600. Refused, since the tokens may be known or chosen by someone else: a file
 * other users can read or write, a file owned by another user, and a folder another user owns
 * or may write to (a sticky folder such as /tmp excepted, the file being checked as ours).
 */
export function loadTokens(dir: string = configDir()): TokenFile {
  const path = join(dir, 'tokens.json');
  const text = readPrivateFile(path);
  if (text !== null) {
    let parsed: unknown;
    try {
      parsed = JSON.parse(text);
    } catch {
      parsed = null;
    }
    if (!validateTokenFile(parsed))
      throw makeError(
        ErrorCodes.TOKEN_FILE,
        'the live-feed token file is not valid',
        path,
        'Delete it to have new tokens made.',
      );
    return { path, tokens: { control: parsed.control, viewer: parsed.viewer }, generated: false };
  }
  const tokens = { control: newToken(), viewer: newToken() };
  try {
    // A folder that was there already keeps its mode (it passed the checks above); one made
    // here is 0700 whatever the umask.
    if (mkdirSync(dir, { recursive: true, mode: 0o700 }) !== undefined) chmodSync(dir, 0o700);
    const tmp = `${path}.${process.pid}.tmp`;
    const fd = openSync(tmp, 'wx', 0o600);
    try {
      writeSync(
        fd,
        `${JSON.stringify({ v: 1, ...tokens, created: new Date().toISOString() }, null, 2)}\n`,
      );
      fsyncSync(fd);
    } finally {
      closeSync(fd);
    }
    renameSync(tmp, path);
  } catch (e) {
    throw makeError(
      ErrorCodes.TOKEN_FILE,
      `cannot write the live-feed token file: ${(e as Error).message}`,
      path,
      `Make sure ${dir} is writable by you, or set CELLVIGIL_HOME to a folder that is.`,
    );
  }
  return { path, tokens, generated: true };
}

/**
 * Constant-time comparison. Both sides are hashed first so the lengths always match and the
 * time taken says nothing about how much of a guess was right.
 */
export function tokenMatches(given: string | null | undefined, expected: string | null): boolean {
  if (typeof given !== 'string' || expected === null || given.length === 0) return false;
  const a = createHash('sha256').update(given).digest();
  const b = createHash('sha256').update(expected).digest();
  return timingSafeEqual(a, b);
}
