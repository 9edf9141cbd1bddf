import { SerialPort } from 'serialport';
import type { Clock } from '../core/clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { SimRig } from './sim-rig.js';

/**
 * The simulated rig on a serial device (one end of a pseudo-terminal pair), so the daemon's
 * real serial path can be exercised without hardware. Runs in real time on the host clock.
 */
export async function attachSimRig(rig: SimRig, path: string, baudRate: number): Promise<{ close(): Promise<void> }> {
  const port = new SerialPort({ path, baudRate, autoOpen: false });
  await new Promise<void>((resolve, reject) =>
    port.open((err) =>
      err
        ? reject(makeError(ErrorCodes.PORT_OPEN, `cannot open the simulator's side of the link: ${err.message}`, `--port ${path}`, 'Create a pseudo-terminal pair first (see docs/simulated-rig.md) and pass one end.'))
        : resolve(),
    ),
  );
  port.on('data', (chunk: Buffer) => rig.receive(chunk.toString('latin1')));
  // Errors after opening (the other side closing) end nothing here: a rig keeps running unheard.
  port.on('error', () => undefined);
  rig.start((text) => {
    if (port.isOpen) port.write(text);
  });
  return {
    close: async () => {
      rig.stop();
      if (!port.isOpen) return;
      await new Promise<void>((resolve) => port.drain(() => port.close(() => resolve())));
    },
  };
}

/** The truth file the `sim` command keeps up to date, for tests and for checking a run. */
export function truthSnapshot(rig: SimRig, clock: Clock): Record<string, unknown> {
  return { clock_ms: clock.now(), truth: rig.truth(), load_log: rig.loadLog() };
}
