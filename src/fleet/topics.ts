/**
 * Topic names of the fleet, version 1 (docs/fleet.md). Every topic carries the station id and,
 * below the station, the channel, so one station with many channels fits the same scheme as a
 * one-channel daemon. A new incompatible payload gets a new version segment, never a change here.
 */
export const TOPIC_ROOT = 'cellvigil/v1';

/** Highest channel number protocol v1 carries. */
export const MAX_CHANNEL = 15;

/** Letters, digits, `-` and `_`; no `/`, `+` or `#`, which would break the topic tree. */
export const STATION_ID_PATTERN = '^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$';
const STATION_ID = new RegExp(STATION_ID_PATTERN);

export function isStationId(id: string): boolean {
  return STATION_ID.test(id);
}

/** What a channel publishes (and, for `command`, receives) under its own topic. */
export const CHANNEL_KINDS = [
  'status',
  'sample',
  'state',
  'alarm',
  'mark',
  'result',
  'command',
  'reply',
] as const;
export type ChannelKind = (typeof CHANNEL_KINDS)[number];

export function stationTopic(station: string): string {
  return `${TOPIC_ROOT}/station/${station}/status`;
}

export function channelTopic(station: string, channel: number, kind: ChannelKind): string {
  return `${TOPIC_ROOT}/station/${station}/ch/${channel}/${kind}`;
}

/** Everything every station publishes: what a fleet view subscribes to. */
export const FLEET_SUBSCRIPTIONS = [
  `${TOPIC_ROOT}/station/+/status`,
  ...CHANNEL_KINDS.filter((k) => k !== 'command').map((k) => `${TOPIC_ROOT}/station/+/ch/+/${k}`),
];

/**
 * The MQTT 5 user property a command's sender names itself in (the fleet view: its client id
 * and the page that asked). Self-declared, for the station's log; the token is the check.
 */
export const SENDER_PROPERTY = 'cellvigil-sender';

/** The commands one station listens to, on every channel. */
export function commandSubscription(station: string): string {
  return `${TOPIC_ROOT}/station/${station}/ch/+/command`;
}

export type ParsedTopic =
  | { station: string; channel: null; kind: 'status' }
  | { station: string; channel: number; kind: ChannelKind };

/** Station, channel and kind of a fleet topic, or null for anything else. */
export function parseTopic(topic: string): ParsedTopic | null {
  const parts = topic.split('/');
  if (parts.length < 5 || `${parts[0]}/${parts[1]}` !== TOPIC_ROOT || parts[2] !== 'station')
    return null;
  const station = parts[3]!;
  if (!isStationId(station)) return null;
  if (parts.length === 5)
    return parts[4] === 'status' ? { station, channel: null, kind: 'status' } : null;
  if (parts.length !== 7 || parts[4] !== 'ch' || !/^(?:0|[1-9]\d?)$/.test(parts[5]!)) return null;
  const channel = Number(parts[5]);
  const kind = parts[6] as ChannelKind;
  if (channel > MAX_CHANNEL || !CHANNEL_KINDS.includes(kind)) return null;
  return { station, channel, kind };
}
