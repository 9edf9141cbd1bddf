/**
 * What every rig connection offers the core: lines in, framed commands out. `serial`, `sim`
 * and `replay` implement it; the core never knows which one it has.
 */
export interface SourceHandlers {
  /** One line without its `\n`. */
  line(text: string): void;
  /** The line splitter dropped an overlong run of bytes (noise without newlines). */
  overlong(length: number): void;
  /** The connection ended (port unplugged, file finished); `reason` is for the event log. */
  closed(reason: string): void;
  /** A source that reconnects by itself (a serial port plugged back in) is open again. */
  reopened?(): void;
}

export interface Source {
  readonly kind: 'serial' | 'sim' | 'replay';
  /** Human-readable: a port path, a scenario name, a folder. */
  readonly description: string;
  open(handlers: SourceHandlers): Promise<void>;
  /** Sends one framed command line; returns false when it could not be queued. */
  write(line: string): boolean;
  close(): Promise<void>;
}
