import { existsSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import { Ajv, type ErrorObject } from 'ajv';
import { parseConfigYaml, readConfigText } from '../core/config-file.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { schemaError } from '../core/schema-error.js';
import { STATION_FILE_SCHEMA } from './station-schema.js';
import type { ChannelPlan, RigPlan, StationPlan } from './station-types.js';

interface RawChannel {
  chemistry: string;
  cells?: number;
  cutoff_V_per_cell?: number;
  label?: string;
  cell_id?: string;
  calibration?: string;
  schedule?: string;
}

interface RawRig {
  port?: string;
  sim?: string;
  profile?: string;
  baud?: number;
  link_timeout_s?: number;
  channels: Record<string, RawChannel | 'empty'>;
}

interface RawStation {
  runs?: string;
  listen?: string;
  rigs: Record<string, RawRig>;
}

const ajv = new Ajv({ allErrors: false, verbose: true, strict: true, strictRequired: false });
const validate = ajv.compile(STATION_FILE_SCHEMA);

const HINTS = {
  what: 'station file',
  pattern:
    'Rig names start with a letter and use letters, digits, "_" or "-" (at most 32); channels are 0 to 15; a chemistry is an id `cellvigil chemistries` lists; a cell id is 1 to 64 letters, digits or . _ : / -, starting with a letter or digit.',
  fallback: 'Compare it with config/station-demo.yaml and docs/station.md.',
};

/** Reads and validates a station file; every failure names the file, the key and the fix. */
export async function loadStationFile(path: string): Promise<StationPlan> {
  const file = resolve(path);
  const text = await readConfigText(
    file,
    'station file',
    'Check the path; config/station-demo.yaml is an example.',
  );
  return parseStationFile(text, file);
}

/** The station file's text, validated, as a plan with paths resolved against the file's folder. */
export function parseStationFile(text: string, file: string): StationPlan {
  const data = parseConfigYaml(
    text,
    'station file',
    file,
    'Fix the YAML syntax at the line given.',
  );
  if (!validate(data)) throw firstError(file, data, validate.errors ?? []);
  const raw = data as RawStation;
  const dir = dirname(file);
  const rigs = Object.entries(raw.rigs).map(([name, r]) => rigPlan(dir, name, r));
  checkPorts(file, rigs);
  return {
    file,
    runs: raw.runs !== undefined ? resolve(dir, raw.runs) : null,
    ...(raw.listen !== undefined ? { listen: raw.listen === 'off' ? null : raw.listen } : {}),
    rigs,
  };
}

function rigPlan(dir: string, name: string, r: RawRig): RigPlan {
  const channels: ChannelPlan[] = [];
  const empty: number[] = [];
  const keys = Object.keys(r.channels).sort((a, b) => Number(a) - Number(b));
  for (const key of keys) {
    const c = r.channels[key]!;
    if (c === 'empty') {
      empty.push(Number(key));
      continue;
    }
    channels.push({
      rig: name,
      channel: Number(key),
      chemistry: c.chemistry,
      cells: c.cells ?? null,
      cutoffVPerCell: c.cutoff_V_per_cell ?? null,
      label: c.label ?? null,
      cellId: c.cell_id ?? null,
      calibration: c.calibration !== undefined ? resolve(dir, c.calibration) : null,
      // A schedule is a file beside the station file, or written inline.
      schedule:
        c.schedule === undefined
          ? null
          : existsSync(resolve(dir, c.schedule))
            ? resolve(dir, c.schedule)
            : c.schedule,
    });
  }
  return {
    name,
    // A port is a device path; a relative one (a pseudo-terminal's link) is taken from the file's folder.
    link:
      r.port !== undefined
        ? { kind: 'port', path: devicePath(dir, r.port) }
        : { kind: 'sim', name: r.sim! },
    profile: r.profile !== undefined ? resolve(dir, r.profile) : null,
    baud: r.baud ?? null,
    linkTimeoutS: r.link_timeout_s ?? null,
    channels,
    empty,
  };
}

function devicePath(dir: string, port: string): string {
  return port.startsWith('/') || /^COM\d+$/i.test(port) ? port : resolve(dir, port);
}

/** Two rigs on one port would share a link and fight over its channels. */
function checkPorts(file: string, rigs: RigPlan[]): void {
  const seen = new Map<string, string>();
  for (const r of rigs) {
    if (r.link.kind !== 'port') continue;
    const other = seen.get(r.link.path);
    if (other !== undefined)
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `rigs "${other}" and "${r.name}" are both on ${r.link.path}`,
        `${file}, key rigs.${r.name}.port`,
        'Give every rig its own port; the channels of one rig go under that rig\'s "channels".',
      );
    seen.set(r.link.path, r.name);
  }
}

/** The most telling of ajv's errors, with the fixes a station file needs. */
function firstError(file: string, data: unknown, errors: ErrorObject[]): CellvigilError {
  // A rig with both or neither of port and sim: ajv's own first error would only name one of them.
  const rigChoice = errors.find(
    (e) => e.keyword === 'oneOf' && /^\/rigs\/[^/]+$/.test(e.instancePath),
  );
  const bothOrNeither =
    rigChoice && !errors.some((e) => e.instancePath.startsWith(`${rigChoice.instancePath}/`));
  if (rigChoice && bothOrNeither) {
    const key = rigChoice.instancePath.split('/').slice(1).join('.');
    return makeError(
      ErrorCodes.CONFIG_INVALID,
      `rig ${key.slice('rigs.'.length)} needs exactly one of "port" (a serial device) and "sim" (a simulated rig)`,
      `${file}, key ${key}`,
      'Give `port: /dev/ttyUSB0` for a real rig, or `sim: <rig of the scenario file>` for a simulated one.',
    );
  }
  // A channel that is neither `empty` nor a mapping of settings (a typo of "empty", a bare number).
  const first = errors[0]!;
  const m = /^\/rigs\/([^/]+)\/channels\/([^/]+)$/.exec(first.instancePath);
  if (m) {
    const value = (data as RawStation).rigs[m[1]!]?.channels[m[2]!];
    if (typeof value !== 'object' || value === null)
      return makeError(
        ErrorCodes.CONFIG_INVALID,
        `channel ${m[2]} of rig ${m[1]} is ${JSON.stringify(value)}`,
        `${file}, key rigs.${m[1]}.channels.${m[2]}`,
        'Write `empty` for a channel with nothing on it, or its settings, e.g. `{ chemistry: li-ion, cell_id: A-017 }`.',
      );
  }
  return schemaError(file, first, HINTS);
}
