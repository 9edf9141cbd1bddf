import type { ControlReply, StationControlRequest } from '../live/live-types.js';
import { tokenMatches } from '../live/tokens.js';
import { requestOf } from '../live/control-intake.js';
import { FLEET_VERSION, parsePayload, type FleetReply, type ReplyCode } from './payloads.js';

/**
 * A control request's destination: the hub of the channel it names, if this station has one.
 * `by` says where the request came from, for the run's event log.
 */
export type ControlTarget = (
  channel: number,
) => ((c: StationControlRequest, by: string) => ControlReply) | null;

/**
 * A command from the broker, taken through the same gates as one from the live feed: the
 * payload must validate, name this station and the channel of its topic, and carry the control
 * token; then the channel's hub applies its own checks (the run is on, the cutoff floor) and the
 * daemon its own. The broker's permissions come before all this; they are not a substitute.
 */
export function takeCommand(
  station: string,
  topicChannel: number,
  bytes: Buffer,
  controlToken: string | null,
  target: ControlTarget,
  /** Where the command came from: the broker and, when it names itself, the sender. */
  from: string,
): FleetReply {
  const reply = (
    id: string | null,
    request: FleetReply['request'],
    code: ReplyCode | null,
    error?: string,
  ): FleetReply => ({
    v: FLEET_VERSION,
    station,
    channel: topicChannel,
    id,
    request,
    ok: code === null,
    ...(code !== null ? { code, error: error ?? '' } : {}),
  });
  const parsed = parsePayload('command', bytes);
  if (!parsed.ok) return reply(null, null, 'malformed', parsed.error);
  const m = parsed.value;
  const id = m.id ?? null;
  if (m.station !== station || m.channel !== topicChannel)
    return reply(
      id,
      m.type,
      'malformed',
      'the station and channel in the command differ from its topic',
    );
  if (!tokenMatches(m.token, controlToken))
    return reply(id, m.type, 'unauthorized', 'the control token is missing or wrong');
  const control = target(topicChannel);
  if (!control)
    return reply(id, m.type, 'refused', `this station has no run on channel ${topicChannel}`);
  const r = control(requestOf(m), id !== null ? `${from} (command ${id})` : from);
  return r.ok ? reply(id, m.type, null) : reply(id, m.type, 'refused', r.error);
}
