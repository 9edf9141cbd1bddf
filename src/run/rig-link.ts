/**
 * The link to one rig: its port (serial or simulated), opened with the handlers of the channel
 * it carries, commands written back, the port going away and coming back. What a rig's channels
 * do with its lines is theirs.
 */
import { CellvigilError, ErrorCodes, makeError } from '../core/errors.js';
import type { Source } from '../sources/source.js';

/** What a channel takes from its rig's link. */
export interface LinkListener {
  line(text: string): void;
  overlong(length: number): void;
  linkClosed(reason: string): void;
  linkReopened(): void;
}

export class RigLink {
  constructor(readonly source: Source) {}

  get description(): string {
    return this.source.description;
  }

  /** Opens the port; a failure to open is a CV_PORT_OPEN error naming the port. */
  async open(to: LinkListener): Promise<void> {
    try {
      await this.source.open({
        line: (text) => to.line(text),
        overlong: (n) => to.overlong(n),
        closed: (reason) => to.linkClosed(reason),
        reopened: () => to.linkReopened(),
      });
    } catch (e) {
      throw e instanceof CellvigilError
        ? e
        : makeError(
            ErrorCodes.PORT_OPEN,
            (e as Error).message,
            this.source.description,
            'Check the rig connection.',
          );
    }
  }

  /** A framed command line; false when it could not be queued. */
  send(line: string): boolean {
    return this.source.write(line);
  }

  close(): Promise<void> {
    return this.source.close().catch(() => undefined);
  }
}
