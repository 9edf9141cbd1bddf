import { SerialPort } from 'serialport';
import type { Clock } from '../core/clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { SimRig } from './sim-rig.js';

const REOPEN_EVERY_MS = 200;

/**
 * The simulated rig on a serial device (one end of a pseudo-terminal pair), so the daemon's
 * real serial path can be exercised without hardware. Runs in real time on the host clock.
 * The rig has its own supply: when the link goes away it keeps running (and its watchdog
 * keeps counting), and it reopens the device when it comes back.
 */
export async function attachSimRig(
  rig: SimRig,
  path: string,
  baudRate: number,
): Promise<{ close(): Promise<void> }> {
  let port: SerialPort | null = null;
  let closing = false;
  let retry: NodeJS.Timeout | null = null;

  const connect = async (): Promise<void> => {
    const p = new SerialPort({ path, baudRate, autoOpen: false });
    await new Promise<void>((resolve, reject) => p.open((err) => (err ? reject(err) : resolve())));
    port = p;
    p.on('data', (chunk: Buffer) => rig.receive(chunk.toString('latin1')));
    let gone = false;
    const onGone = (): void => {
      if (gone) return;
      gone = true;
      if (port === p) port = null;
      if (!closing) reopen();
    };
    p.on('close', onGone);
    p.on('error', onGone);
  };
  const reopen = (): void => {
    retry = setTimeout(() => {
      retry = null;
      if (!closing) connect().catch(reopen);
    }, REOPEN_EVERY_MS);
  };

  try {
    await connect();
  } catch (err) {
    throw makeError(
      ErrorCodes.PORT_OPEN,
      `cannot open the simulator's side of the link: ${(err as Error).message}`,
      `--port ${path}`,
      'Create a pseudo-terminal pair first (see docs/simulated-rig.md) and pass one end.',
    );
  }
  rig.start((text) => {
    if (port?.isOpen) port.write(text);
  });
  return {
    close: async () => {
      closing = true;
      if (retry) clearTimeout(retry);
      rig.stop();
      const p = port;
      if (!p?.isOpen) return;
      await new Promise<void>((resolve) => p.drain(() => p.close(() => resolve())));
    },
  };
}

/**
 * The truth file the `sim` command keeps up to date, for tests and for checking a run: the
 * first channel's at the top (as a one-channel rig has always written it), and every
 * channel's under `channels`.
 */
export function truthSnapshot(rig: SimRig, clock: Clock): Record<string, unknown> {
  const channels: Record<string, unknown> = {};
  // A 1.1 rig's channels also carry their mode, charge and setpoint truth, and their mode log.
  const more = (ch?: number) =>
    rig.speaks11 ? { truth11: rig.truth11(ch), mode_log: rig.modeLog(ch) } : {};
  for (const ch of rig.channelNumbers)
    channels[ch] = { truth: rig.truth(ch), load_log: rig.loadLog(ch), ...more(ch) };
  return {
    clock_ms: clock.now(),
    truth: rig.truth(),
    load_log: rig.loadLog(),
    ...more(),
    channels,
  };
}
