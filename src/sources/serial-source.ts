import { SerialPort } from 'serialport';
import { LineSplitter } from './line-splitter.js';
import type { Source, SourceHandlers } from './source.js';
import { ErrorCodes, makeError } from '../core/errors.js';

export interface SerialSourceOptions {
  path: string;
  /** @default 115200 */
  baudRate?: number;
  /** Longest wait between attempts to reopen a port that went away. @default 1000 */
  maxRetryMs?: number;
}

/** Bytes read but not yet handed to the core before the port is paused. */
const MAX_PENDING_BYTES = 256 * 1024;

/**
 * A real device or a pseudo-terminal, through serialport's native binding. A port that goes
 * away (USB unplugged) is reopened with a short backoff, so a returning rig is heard again
 * within about a second of coming back.
 */
export class SerialSource implements Source {
  readonly kind = 'serial' as const;
  readonly description: string;
  private port: SerialPort | null = null;
  private wanted = false;
  private retryTimer: NodeJS.Timeout | null = null;
  private readonly options: SerialSourceOptions;

  constructor(options: SerialSourceOptions) {
    this.options = options;
    this.description = options.path;
  }

  async open(handlers: SourceHandlers): Promise<void> {
    this.wanted = true;
    try {
      await this.connect(handlers);
    } catch (err) {
      this.wanted = false;
      throw makeError(
        ErrorCodes.PORT_OPEN,
        `Could not open serial port: ${(err as Error).message}`,
        `--port ${this.options.path}`,
        'Check the path (ls /dev/ttyUSB* /dev/ttyACM*), that no other program holds the port, and that you may read it (group dialout).',
      );
    }
  }

  private async connect(handlers: SourceHandlers): Promise<void> {
    const port = new SerialPort({
      path: this.options.path,
      baudRate: this.options.baudRate ?? 115200,
      autoOpen: false,
    });
    await new Promise<void>((resolve, reject) =>
      port.open((err) => (err ? reject(err) : resolve())),
    );
    this.port = port;
    // A fresh splitter per connection: a half line from before the break is not glued to the next.
    const splitter = new LineSplitter({
      onLine: (line) => handlers.line(line),
      onOverlong: (n) => handlers.overlong(n),
    });
    // Chunks are split and handed over in the next turn, not inside the read's callback: the
    // port's next read is then already under way while the core works on this one. A few
    // hundred KiB at most wait; past that the port is paused until they are done.
    const pending: Buffer[] = [];
    let pendingBytes = 0;
    let drainQueued: NodeJS.Immediate | null = null;
    let gone = false;
    const drain = (): void => {
      drainQueued = null;
      pendingBytes = 0;
      for (const chunk of pending.splice(0)) splitter.write(chunk);
      if (!gone && port.isPaused()) port.resume();
    };
    const onData = (chunk: Buffer): void => {
      pending.push(chunk);
      pendingBytes += chunk.length;
      if (pendingBytes >= MAX_PENDING_BYTES) port.pause();
      drainQueued ??= setImmediate(drain);
    };
    port.on('data', onData);
    const onGone = (reason: string): void => {
      if (gone) return;
      gone = true;
      port.off('data', onData);
      if (drainQueued) clearImmediate(drainQueued);
      drain();
      if (this.port === port) this.port = null;
      if (!this.wanted) return;
      handlers.closed(reason);
      this.retry(handlers, 100);
    };
    port.on('close', () => onGone('port closed'));
    port.on('error', (err: Error) => onGone(`port error: ${err.message}`));
  }

  private retry(handlers: SourceHandlers, delayMs: number): void {
    this.retryTimer = setTimeout(() => {
      this.retryTimer = null;
      if (!this.wanted) return;
      this.connect(handlers).then(
        () => handlers.reopened?.(),
        () => this.retry(handlers, Math.min(delayMs * 2, this.options.maxRetryMs ?? 1000)),
      );
    }, delayMs);
  }

  write(line: string): boolean {
    if (!this.port || !this.port.isOpen) return false;
    this.port.write(line);
    return true;
  }

  async close(): Promise<void> {
    this.wanted = false;
    if (this.retryTimer) clearTimeout(this.retryTimer);
    this.retryTimer = null;
    const port = this.port;
    this.port = null;
    if (!port || !port.isOpen) return;
    await new Promise<void>((resolve) => port.drain(() => port.close(() => resolve())));
  }
}
