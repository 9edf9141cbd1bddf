import type { RawData } from 'ws';
import type { ClientMessage, LiveErrorCode, StationControlRequest } from './live-types.js';
import { checkClientMessage } from './message-schemas.js';

/** A viewer's message read: the request it makes, or why it was not understood. */
export type Intake =
  | { ok: true; id: string | null; message: ClientMessage; request: StationControlRequest }
  | { ok: false; id: string | null; code: LiveErrorCode; error: string };

/** Reads and checks one WebSocket message from a viewer; the token is the caller's to check. */
export function readControl(data: RawData, isBinary: boolean): Intake {
  if (isBinary) return { ok: false, id: null, code: 'malformed', error: 'messages are JSON text' };
  let parsed: unknown;
  try {
    parsed = JSON.parse(data.toString());
  } catch {
    return { ok: false, id: null, code: 'malformed', error: 'the message is not JSON' };
  }
  const rawId = (parsed as { id?: unknown } | null)?.id;
  const id = typeof rawId === 'string' && rawId.length <= 64 ? rawId : null;
  const checked = checkClientMessage(parsed);
  if (!checked.ok) return { ok: false, id, code: 'malformed', error: checked.error };
  const m = checked.value;
  return { ok: true, id, message: m, request: requestOf(m) };
}

/**
 * The request alone, without the version, token, id and channel that carried it: one reading
 * for the live feed's messages and the fleet's commands, so both pass the same fields on.
 */
export function requestOf(m: StationControlRequest): StationControlRequest {
  if (m.type === 'stop') return { type: m.type };
  if (m.type === 'set-cutoff')
    return { type: m.type, cutoff_V: m.cutoff_V, ...(m.confirm === true ? { confirm: true } : {}) };
  if (m.type === 'mark') return { type: m.type, note: m.note };
  return { type: m.type, ...(m.cell_id !== undefined ? { cell_id: m.cell_id } : {}) };
}
