import { startRun } from '../run/daemon.js';
import { DEFAULT_ROTATE_BYTES, type RunRequest } from '../run/run-request.js';
import type { ChannelRunner, ChannelRunRequest } from '../station/channel-runner.js';
import { prefixedLines } from '../station/prefixed-lines.js';
import { channelKey } from '../station/station-types.js';

export interface ChannelRunnerOptions {
  /** Where each channel's own lines go, prefixed with the channel. */
  print(line: string): void;
  /** @default DEFAULT_ROTATE_BYTES */
  rotateBytes?: number;
  chemistriesFile?: string;
}

/** What `run` would have been asked for this channel: its cell, limits and files. */
export function channelRequest(r: ChannelRunRequest, o: ChannelRunnerOptions): RunRequest {
  const p = r.plan;
  const label = p.label ?? `${p.rig}-ch${p.channel}${r.cellId !== null ? `-${r.cellId}` : ''}`;
  return {
    // The link is the station's; the run only names it (in its manifest and messages).
    port: r.source.description,
    speed: 1,
    runs: r.runs,
    listen: null,
    once: true,
    fresh: true,
    linkTimeoutS: r.linkTimeoutS,
    rotateBytes: o.rotateBytes ?? DEFAULT_ROTATE_BYTES,
    channel: p.channel,
    chemistry: p.chemistry,
    label,
    ...(r.resume !== null ? { resume: r.resume } : {}),
    ...(r.rig.profile !== null ? { rig: r.rig.profile } : {}),
    ...(p.cells !== null ? { cells: p.cells } : {}),
    ...(p.cutoffVPerCell !== null ? { cutoff: p.cutoffVPerCell } : {}),
    ...(p.calibration !== null ? { calibration: p.calibration } : {}),
    ...(p.schedule !== null ? { schedule: p.schedule } : {}),
    ...(r.cellId !== null ? { cellId: r.cellId } : {}),
    ...(o.chemistriesFile !== undefined ? { chemistriesFile: o.chemistriesFile } : {}),
  };
}

/**
 * A channel's run on the run layer: the same run as `run` makes, on the channel's view of its
 * rig's shared link and the station's clock, its live figures going to the channel's hub.
 */
export function channelRunner(o: ChannelRunnerOptions): ChannelRunner {
  return async (r) => {
    const key = channelKey(r.plan.rig, r.plan.channel);
    const out = prefixedLines(`${key}:`, o.print);
    const handle = await startRun(
      channelRequest(r, o),
      { out, err: out, signals: false },
      {
        source: r.source,
        timers: r.timers,
        ...(r.clock ? { clock: r.clock } : {}),
        ...(r.hub ? { hub: r.hub } : {}),
      },
    );
    return {
      folder: handle.folder,
      done: handle.done.then((d) => ({
        exitCode: d.exitCode,
        folder: d.folder,
        result: d.result as unknown as Record<string, unknown>,
      })),
      stop: (by) => handle.stop(by),
      setCutoffPerCell: (v, by) => handle.setCutoffPerCell(v, by),
      mark: (note, by) => handle.mark(note, by),
    };
  };
}
