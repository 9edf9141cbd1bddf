import { readSync } from 'node:fs';
import {
  autoDetect,
  BindingsError,
  DarwinPortBinding,
  LinuxPortBinding,
  type BindingInterface,
} from '@serialport/bindings-cpp';

type PollingPort = LinuxPortBinding | DarwinPortBinding;
type ReadResult = { buffer: Buffer; bytesRead: number };

const detected = autoDetect();

/** Errors of a read that mean the device is gone rather than "try again". */
const GONE_CODES = new Set(['EBADF', 'ENXIO', 'EIO', 'UNKNOWN']);
const AGAIN_CODES = new Set(['EAGAIN', 'EWOULDBLOCK', 'EINTR']);

function readable(port: PollingPort): Promise<void> {
  return new Promise((resolve, reject) =>
    port.poller.once('readable', (err?: Error | null) => (err ? reject(err) : resolve())),
  );
}

/**
 * Reads a port the way Node reads a socket: read what is there at once on the event loop (the
 * descriptor is non-blocking, so the read cannot stall it), and only when nothing is there wait
 * until the descriptor is readable. The stock read sends every chunk through the thread pool,
 * a round trip and a worker thread woken per chunk, which a station reading eight rigs paid
 * hundreds of times a second.
 */
async function readNow(
  port: PollingPort,
  buffer: Buffer,
  offset: number,
  length: number,
): Promise<ReadResult> {
  for (;;) {
    if (!port.isOpen || port.fd === null)
      throw new BindingsError('Port is not open', { canceled: true });
    try {
      const bytesRead = readSync(port.fd, buffer, offset, length, null);
      if (bytesRead > 0) return { buffer, bytesRead };
      // Nothing read (a hang-up the poller reports next): wait as for EAGAIN.
    } catch (e) {
      const err = e as NodeJS.ErrnoException & { disconnect?: boolean };
      if (!AGAIN_CODES.has(err.code ?? '')) {
        if (GONE_CODES.has(err.code ?? '') || err.errno === -1) err.disconnect = true;
        throw err;
      }
    }
    await readable(port);
  }
}

/**
 * serialport's own binding for this platform, with reads done by readNow where the
 * platform's port has a poller (Linux, macOS); elsewhere unchanged.
 */
export const pollReadBinding: BindingInterface = {
  list: () => detected.list(),
  async open(options) {
    // The platform's binding takes its own narrower options; the stream passes them through.
    const port = await (detected as BindingInterface).open(options);
    if (port instanceof LinuxPortBinding || port instanceof DarwinPortBinding) {
      port.read = (buffer: Buffer, offset: number, length: number) =>
        readNow(port, buffer, offset, length);
    }
    return port;
  },
};
