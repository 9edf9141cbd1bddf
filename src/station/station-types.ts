/** A station as its file describes it, after validation; paths are absolute. */
export interface StationPlan {
  file: string;
  /** Where run folders go; the command line's --runs when absent. */
  runs: string | null;
  /** host:port of the live feed, `null` for none, `undefined` for the command line's choice. */
  listen?: string | null;
  rigs: RigPlan[];
}

export type RigLinkPlan = { kind: 'port'; path: string } | { kind: 'sim'; name: string };

export interface RigPlan {
  /** The rig's name in the file: a key of `rigs`, shown on every screen. */
  name: string;
  link: RigLinkPlan;
  /** Rig profile file; the package's bench profile when absent. */
  profile: string | null;
  /** Serial speed; the profile's frame.baud when absent. */
  baud: number | null;
  /** How long a vanished port is waited for before its channels end as link_lost, s. */
  linkTimeoutS: number | null;
  /** The occupied channels, in channel order. */
  channels: ChannelPlan[];
  /** Channels the file marks `empty`: nothing is switched on there. */
  empty: number[];
}

/** What is on a channel: the cell and how to discharge it. */
export interface ChannelPlan {
  rig: string;
  channel: number;
  chemistry: string;
  cells: number | null;
  cutoffVPerCell: number | null;
  label: string | null;
  /** Free text chosen by the user: what is written on the cell. */
  cellId: string | null;
  calibration: string | null;
  /** A schedule file or its inline form, as `run --schedule` takes it. */
  schedule: string | null;
}

/** A channel's short name on screens and in messages: `<rig>/<channel>`. */
export function channelKey(rig: string, channel: number): string {
  return `${rig}/${channel}`;
}
