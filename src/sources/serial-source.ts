import { SerialPortStream } from '@serialport/stream';
import { LineSplitter } from './line-splitter.js';
import type { Source, SourceHandlers } from './source.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { pollReadBinding } from './poll-read-binding.js';
import { lockPort, type PortLock } from './port-lock.js';

export interface SerialSourceOptions {
  path: string;
  /** @default 115200 */
  baudRate?: number;
  /** Longest wait between attempts to reopen a port that went away. @default 1000 */
  maxRetryMs?: number;
  /** Who holds the port, for a second program's refusal (the run). @default the command line */
  holder?: string;
  /** Where port lock files go. @default the OS temporary folder */
  lockDir?: string;
}

/** Bytes read but not yet handed to the core before the port is paused. */
const MAX_PENDING_BYTES = 256 * 1024;

/**
 * A real device or a pseudo-terminal, through serialport's native binding (read as in
 * poll-read-binding.ts). A port that goes
 * away (USB unplugged) is reopened with a short backoff, so a returning rig is heard again
 * within about a second of coming back.
 */
export class SerialSource implements Source {
  readonly kind = 'serial' as const;
  readonly description: string;
  private port: SerialPortStream | null = null;
  private wanted = false;
  private retryTimer: NodeJS.Timeout | null = null;
  private lock: PortLock | null = null;
  private readonly releaseOnExit = (): void => this.unlock();
  private readonly options: SerialSourceOptions;

  constructor(options: SerialSourceOptions) {
    this.options = options;
    this.description = options.path;
  }

  async open(handlers: SourceHandlers): Promise<void> {
    const holder = this.options.holder ?? `cellvigil ${process.argv.slice(2).join(' ')}`;
    this.lock = lockPort(this.options.path, holder, this.options.lockDir);
    process.once('exit', this.releaseOnExit);
    this.wanted = true;
    try {
      await this.connect(handlers);
    } catch (err) {
      this.wanted = false;
      this.unlock();
      const message = (err as Error).message;
      throw makeError(
        ErrorCodes.PORT_OPEN,
        `Could not open serial port: ${message}`,
        `--port ${this.options.path}`,
        /Cannot lock port/.test(message)
          ? 'Another program (a terminal, a flasher, a serial monitor) holds the port; close it and start again.'
          : 'Check the path (ls /dev/ttyUSB* /dev/ttyACM*), that no other program holds the port, and that you may read it (group dialout).',
      );
    }
  }

  private unlock(): void {
    process.off('exit', this.releaseOnExit);
    this.lock?.release();
    this.lock = null;
  }

  private async connect(handlers: SourceHandlers): Promise<void> {
    const port = new SerialPortStream({
      binding: pollReadBinding,
      path: this.options.path,
      baudRate: this.options.baudRate ?? 115200,
      autoOpen: false,
      // An exclusive lock on the device itself, against programs that do not know our lock file.
      lock: true,
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
    if (port?.isOpen)
      await new Promise<void>((resolve) => port.drain(() => port.close(() => resolve())));
    this.unlock();
  }
}
