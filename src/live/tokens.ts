import { randomBytes, timingSafeEqual, createHash } from 'node:crypto';
import {
  chmodSync,
  closeSync,
  fsyncSync,
  mkdirSync,
  openSync,
  readFileSync,
  renameSync,
  statSync,
  writeSync,
} from 'node:fs';
import { homedir } from 'node:os';
import { join } from 'node:path';
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
  code: ErrorCode;
  /** Said after the chmod advice, e.g. "or delete it to have new tokens made". */
  otherwise: string;
}

const TOKEN_FILE_KIND: PrivateFileKind = {
  what: 'the live-feed token file',
  code: ErrorCodes.TOKEN_FILE,
  otherwise: 'or delete it to have new tokens made',
};

function unreadable(path: string, e: unknown, kind: PrivateFileKind): Error {
  return makeError(
    kind.code,
    `cannot read ${kind.what}: ${(e as Error).message}`,
    path,
    'Check the file and folder permissions.',
  );
}

/**
 * The file's text, or null when there is none; refuses a file other users can read or change,
 * since a secret in it may be known.
 */
export function readPrivateFile(
  path: string,
  kind: PrivateFileKind = TOKEN_FILE_KIND,
): string | null {
  let mode: number;
  try {
    mode = statSync(path).mode;
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw unreadable(path, e, kind);
  }
  if (process.platform !== 'win32' && (mode & 0o077) !== 0)
    throw makeError(
      kind.code,
      `${kind.what} can be read or changed by other users (mode ${(mode & 0o777).toString(8)})`,
      path,
      `Run chmod 600 '${path}' if nobody else could have read it, ${kind.otherwise}.`,
    );
  try {
    return readFileSync(path, 'utf8');
  } catch (e) {
    throw unreadable(path, e, kind);
  }
}

/**
 * Reads the tokens from `<dir>/tokens.json`, making both on first use. The folder is 0700 and
 * the file 0600; a file other users can read or write is refused, since its tokens may be known.
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
    mkdirSync(dir, { recursive: true, mode: 0o700 });
    chmodSync(dir, 0o700);
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
