import type { RigProfile } from '../chain/rig-profile-types.js';
import type { Clock } from '../core/clock.js';
import type { SimRig } from '../sim/sim-rig.js';
import { buildSimRig, type SimOverrides, type SimScenario } from '../sim/scenarios.js';
import { LineBuffer } from './line-buffer.js';
import type { Source, SourceHandlers } from './source.js';

export interface SimSourceOptions {
  scenario: SimScenario;
  /** The clock the rig's physics and frames run on; the daemon stamps arrivals with it too. */
  clock: Clock;
  profile: RigProfile;
  overrides?: SimOverrides;
}

/** A simulated rig already built (one with several channels, say), on the clock it runs on. */
export interface BuiltSimSourceOptions {
  rig: SimRig;
  clock: Clock;
  description: string;
}

/** Host-to-rig latency on the virtual clock, like a few bytes at 115200 baud. */
const COMMAND_DELAY_MS = 2;

/**
 * The simulated rig behind the Source interface. Rig output reaches the handlers at once (the
 * clock's current time is its arrival time); host commands reach the rig after a short delay
 * on the clock, so a reply never re-enters the handler that sent the command.
 */
export class SimSource implements Source {
  readonly kind = 'sim' as const;
  readonly description: string;
  readonly rig: SimRig;
  private readonly clock: Clock;
  private open_ = false;

  constructor(o: SimSourceOptions | BuiltSimSourceOptions) {
    this.clock = o.clock;
    if ('rig' in o) {
      this.description = o.description;
      this.rig = o.rig;
      return;
    }
    this.description = `simulated rig, scenario ${o.scenario.name}`;
    this.rig = buildSimRig(o.scenario, o.clock, o.profile, o.overrides ?? {});
  }

  async open(handlers: SourceHandlers): Promise<void> {
    const lines = new LineBuffer(
      256,
      (l) => handlers.line(l),
      (n) => handlers.overlong(n),
    );
    this.open_ = true;
    this.rig.start((chunk) => {
      if (this.open_) lines.push(chunk);
    });
  }

  write(line: string): boolean {
    if (!this.open_) return false;
    this.clock.setTimer(() => this.rig.receive(line), COMMAND_DELAY_MS);
    return true;
  }

  /** Powers the simulated rig down, as unplugging it would: its load goes off. */
  async close(): Promise<void> {
    if (!this.open_) return;
    this.open_ = false;
    this.rig.stop();
  }
}

export function createSimSource(o: SimSourceOptions): SimSource {
  return new SimSource(o);
}
