import { readFileSync } from 'node:fs';
import { hostname } from 'node:os';
import { Ajv } from 'ajv';
import type { IClientOptions } from 'mqtt';
import { ErrorCodes, makeError } from '../core/errors.js';
import { readPrivateFile } from '../live/tokens.js';
import { isStationId } from './topics.js';

/** The broker options as the command line gives them. */
export interface BrokerRequest {
  /** mqtt://host:port, mqtts://…, ws://… or wss://… */
  url: string;
  clientId?: string;
  /** JSON file `{ "username": …, "password": … }`, readable by its owner only. */
  credentialsFile?: string;
  /** PEM file of the certificate authority that signed the broker's certificate (TLS). */
  caFile?: string;
  /** PEM client certificate and key, for a broker that asks for one (TLS). */
  certFile?: string;
  keyFile?: string;
}

/** A broker ready to connect to: its address without secrets, and the client's options. */
export interface BrokerConfig {
  url: string;
  options: IClientOptions;
}

const CREDENTIALS_SCHEMA = {
  type: 'object',
  additionalProperties: false,
  required: ['username', 'password'],
  properties: {
    username: { type: 'string', minLength: 1, maxLength: 256 },
    password: { type: 'string', minLength: 1, maxLength: 1024 },
  },
} as const;
const validateCredentials = new Ajv({ strict: true }).compile<{
  username: string;
  password: string;
}>(CREDENTIALS_SCHEMA);

const PROTOCOLS = new Set(['mqtt:', 'mqtts:', 'ws:', 'wss:']);

function bad(what: string, where: string, fix: string): Error {
  return makeError(ErrorCodes.BROKER_CONFIG, what, where, fix);
}

/** Username and password from an owner-only JSON file (docs/fleet.md "Credentials"). */
export function loadCredentials(path: string): { username: string; password: string } {
  const text = readPrivateFile(path, {
    what: 'the broker credentials file',
    folder: "the broker credentials file's folder",
    code: ErrorCodes.BROKER_CONFIG,
    otherwise: 'or change the password on the broker if it may be known',
    remake: 'Write it again as a plain file of your own, readable only by you (chmod 600).',
  });
  if (text === null)
    throw bad(
      'the broker credentials file does not exist',
      path,
      'Give the file the broker account is written in.',
    );
  let parsed: unknown;
  try {
    parsed = JSON.parse(text);
  } catch {
    parsed = null;
  }
  if (!validateCredentials(parsed))
    throw bad(
      'the broker credentials file is not valid',
      path,
      'Write it as {"username": "…", "password": "…"} and nothing else.',
    );
  return parsed;
}

function readPem(path: string, option: string): Buffer {
  try {
    return readFileSync(path);
  } catch (e) {
    throw bad(`cannot read ${path}: ${(e as Error).message}`, option, 'Give a readable PEM file.');
  }
}

/** Validates the options before any connection is tried; names the option at fault. */
export function resolveBroker(req: BrokerRequest, defaultClientId: string): BrokerConfig {
  let u: URL;
  try {
    u = new URL(req.url);
  } catch {
    throw bad(
      `cannot read '${req.url}' as a broker address`,
      '--broker',
      'Give e.g. mqtt://192.168.1.5:1883 or mqtts://broker.lan:8883.',
    );
  }
  if (!PROTOCOLS.has(u.protocol))
    throw bad(
      `the broker address uses ${u.protocol}`,
      '--broker',
      'Use mqtt://, mqtts://, ws:// or wss://.',
    );
  if (u.username || u.password)
    throw bad(
      'the broker address carries a user name or password, which would show in the process list',
      '--broker',
      'Put them in a file given with --broker-credentials (owner-only).',
    );
  const clientId = req.clientId ?? defaultClientId;
  if (!/^[\x21-\x7e]{1,128}$/.test(clientId))
    throw bad(
      `'${clientId}' cannot be a client id`,
      '--broker-client-id',
      'Use 1 to 128 printable characters without spaces.',
    );
  const tls = u.protocol === 'mqtts:' || u.protocol === 'wss:';
  if (!tls && (req.caFile || req.certFile || req.keyFile))
    throw bad(
      'TLS files were given for a broker address without TLS',
      '--broker',
      'Use mqtts:// or wss://.',
    );
  if ((req.certFile === undefined) !== (req.keyFile === undefined))
    throw bad(
      'a client certificate needs its key, and a key its certificate',
      '--broker-cert / --broker-key',
      'Give both or neither.',
    );
  const creds = req.credentialsFile ? loadCredentials(req.credentialsFile) : null;
  const options: IClientOptions = {
    clientId,
    ...(creds ? { username: creds.username, password: creds.password } : {}),
    ...(req.caFile ? { ca: readPem(req.caFile, '--broker-ca') } : {}),
    ...(req.certFile ? { cert: readPem(req.certFile, '--broker-cert') } : {}),
    ...(req.keyFile ? { key: readPem(req.keyFile, '--broker-key') } : {}),
  };
  return { url: `${u.protocol}//${u.host}${u.pathname === '/' ? '' : u.pathname}`, options };
}

/** This machine's name as a station id (characters a topic cannot carry become `-`). */
export function defaultStationId(): string {
  const id = hostname()
    .replace(/[^A-Za-z0-9_-]/g, '-')
    .replace(/^[-_]+/, '')
    .slice(0, 64);
  return isStationId(id) ? id : 'station';
}

export function checkStationId(id: string): string {
  if (!isStationId(id))
    throw bad(
      `'${id}' cannot be a station id`,
      '--station',
      'Use letters, digits, - and _ (at most 64), starting with a letter or digit.',
    );
  return id;
}
