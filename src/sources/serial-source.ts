import { SerialPort } from 'serialport';
import { LineSplitter } from './line-splitter.js';
import type { Source, SourceHandlers } from './source.js';
import { ErrorCodes, makeError } from '../core/errors.js';

export interface SerialSourceOptions {
  path: string;
  /** @default 115200 */
  baudRate?: number;
}

/** A real device or a pseudo-terminal, through serialport's native binding. */
export class SerialSource implements Source {
  readonly kind = 'serial' as const;
  readonly description: string;
  private port: SerialPort | null = null;
  private readonly options: SerialSourceOptions;

  constructor(options: SerialSourceOptions) {
    this.options = options;
    this.description = options.path;
  }

  async open(handlers: SourceHandlers): Promise<void> {
    const port = new SerialPort({ path: this.options.path, baudRate: this.options.baudRate ?? 115200, autoOpen: false });
    await new Promise<void>((resolve, reject) => {
      port.open((err) => {
        if (err) {
          reject(
            makeError(
              ErrorCodes.PORT_OPEN,
              `Could not open serial port: ${err.message}`,
              `--port ${this.options.path}`,
              'Check the path (ls /dev/ttyUSB* /dev/ttyACM*), that no other program holds the port, and that you may read it (group dialout).',
            ),
          );
        } else resolve();
      });
    });
    this.port = port;
    const splitter = new LineSplitter({ onOverlong: (n) => handlers.overlong(n) });
    port.pipe(splitter);
    splitter.on('data', (line: string) => handlers.line(line));
    let closed = false;
    const onClose = (reason: string): void => {
      if (closed) return;
      closed = true;
      handlers.closed(reason);
    };
    port.on('close', () => onClose('port closed'));
    port.on('error', (err: Error) => onClose(`port error: ${err.message}`));
  }

  write(line: string): boolean {
    if (!this.port || !this.port.isOpen) return false;
    this.port.write(line);
    return true;
  }

  async close(): Promise<void> {
    const port = this.port;
    this.port = null;
    if (!port || !port.isOpen) return;
    await new Promise<void>((resolve) => port.drain(() => port.close(() => resolve())));
  }
}
