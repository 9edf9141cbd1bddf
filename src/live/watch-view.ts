import { ErrorCodes, makeError } from '../core/errors.js';
import { exitCodeForResult } from '../record/result.js';
import type { LiveAlarm, LiveRunInfo, LiveSample, ServerMessage } from './live-types.js';

/** What the terminal viewer shows, folded from the live-feed messages. Pure. */
export interface WatchView {
  run: LiveRunInfo | null;
  sample: LiveSample | null;
  state: string;
  cutoffV: number | null;
  timeToCutoffS: number | null;
  alarms: LiveAlarm[];
  result: Record<string, unknown> | null;
  link: string;
}

const ALARMS_SHOWN = 3;

export function emptyView(): WatchView {
  return {
    run: null,
    sample: null,
    state: '',
    cutoffV: null,
    timeToCutoffS: null,
    alarms: [],
    result: null,
    link: 'connecting',
  };
}

/** Folds one message into the view; returns whether it is worth a line of its own (not a sample). */
export function applyMessage(view: WatchView, m: ServerMessage): boolean {
  switch (m.type) {
    case 'hello':
      view.run = m.run;
      view.sample = m.status.sample;
      view.state = m.status.state;
      view.cutoffV = m.status.cutoff_V;
      view.timeToCutoffS = m.status.time_to_cutoff_s;
      view.alarms = m.alarms.slice(-ALARMS_SHOWN);
      view.result = m.result;
      return true;
    case 'sample': {
      const { type: _t, v: _v, time_to_cutoff_s, ...s } = m;
      view.sample = s;
      view.state = s.state;
      view.timeToCutoffS = time_to_cutoff_s;
      return false;
    }
    case 'state':
      view.state = m.to;
      return true;
    case 'alarm':
      view.alarms = [...view.alarms, { host_s: m.host_s, kind: m.kind, detail: m.detail }].slice(
        -ALARMS_SHOWN,
      );
      return true;
    case 'cutoff':
      view.cutoffV = m.cutoff_V;
      return true;
    case 'result':
      view.result = m.result;
      return true;
    case 'mark':
    case 'ack':
    case 'error':
    case 'station':
      return false;
  }
}

export { exitCodeForResult };

function fixed(x: number | null | undefined, digits: number): string {
  return typeof x === 'number' && Number.isFinite(x) ? x.toFixed(digits) : '–';
}

export function clockText(s: number | null | undefined): string {
  if (typeof s !== 'number' || !Number.isFinite(s)) return '–';
  const t = Math.max(0, Math.round(s));
  return `${Math.floor(t / 3600)}:${String(Math.floor((t % 3600) / 60)).padStart(2, '0')}:${String(t % 60).padStart(2, '0')}`;
}

function readings(v: WatchView): string {
  const s = v.sample;
  return [
    `${fixed(s?.voltage_V, 3)} V`,
    `${fixed(s?.current_A, 3)} A`,
    `${s ? fixed(s.charge_Ah * 1000, 0) : '–'} mAh`,
    `${fixed(s?.energy_Wh, 2)} Wh`,
    `${fixed(s?.temperature_C, 1)} °C`,
  ].join('  ');
}

function resultText(r: Record<string, unknown>): string {
  const num = (k: string) => (typeof r[k] === 'number' ? (r[k] as number) : null);
  const cap = num('capacity_Ah');
  return [
    `ended: ${String(r.end_reason ?? 'unknown')}`,
    cap !== null ? `${(cap * 1000).toFixed(0)} mAh` : null,
    num('energy_Wh') !== null ? `${num('energy_Wh')!.toFixed(2)} Wh` : null,
    num('duration_s') !== null ? `in ${clockText(num('duration_s'))}` : null,
  ]
    .filter((x) => x !== null)
    .join('  ');
}

/** The few lines the terminal redraws in place. */
export function statusBlock(v: WatchView): string[] {
  const head = v.run
    ? `${v.run.label} · ${v.run.cells} × ${v.run.chemistry} · ${v.run.source}`
    : 'no run yet';
  const lines = [
    `${head}  [${v.link}]`,
    readings(v),
    `state ${v.state || '–'}  elapsed ${clockText(v.sample?.host_s)}  cutoff ${fixed(v.cutoffV, 3)} V  to cutoff ${v.result ? '–' : clockText(v.timeToCutoffS)}`,
  ];
  for (const a of v.alarms) lines.push(`! ${clockText(a.host_s)} ${a.kind}: ${a.detail}`);
  if (v.result) lines.push(resultText(v.result));
  return lines;
}

/** One line per update, for logs and pipes. */
export function statusLine(v: WatchView): string {
  const parts = [
    clockText(v.sample?.host_s),
    v.state || '–',
    readings(v),
    `ttc ${v.result ? '–' : clockText(v.timeToCutoffS)}`,
  ];
  const last = v.alarms[v.alarms.length - 1];
  if (last) parts.push(`last alarm ${last.kind}`);
  if (v.result) parts.push(resultText(v.result));
  return parts.join('  ');
}

/**
 * The WebSocket address for what a person types: http(s)://host:port/ becomes ws(s)://…/live,
 * a bare host:port gets ws://, and `token` (when given) is added as ?token=. A fleet view's
 * channel address (/channel?station=…&ch=…) keeps its station and channel.
 */
export function liveSocketUrl(input: string, token?: string): string {
  const text = /^[a-z][a-z0-9+.-]*:\/\//i.test(input) ? input : `http://${input}`;
  let u: URL;
  try {
    u = new URL(text);
  } catch {
    throw makeError(
      ErrorCodes.USAGE,
      `cannot read '${input}' as an address`,
      'watch <url>',
      'Give the address the daemon printed, for example http://192.168.1.20:8507/.',
    );
  }
  const schemes: Record<string, string> = {
    'http:': 'ws:',
    'https:': 'wss:',
    'ws:': 'ws:',
    'wss:': 'wss:',
  };
  const scheme = schemes[u.protocol];
  if (!scheme)
    throw makeError(
      ErrorCodes.USAGE,
      `'${u.protocol}' is not an address the live feed serves`,
      'watch <url>',
      'Use http://, https://, ws:// or wss://.',
    );
  const out = new URL(`${scheme}//${u.host}/live`);
  const t = token ?? u.searchParams.get('token');
  if (t) out.searchParams.set('token', t);
  // A fleet view's channel page names its station and channel; its /live socket needs them.
  for (const k of ['station', 'ch']) {
    const x = u.searchParams.get(k);
    if (x !== null) out.searchParams.set(k, x);
  }
  return out.toString();
}
