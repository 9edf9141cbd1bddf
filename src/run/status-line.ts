export interface LiveStatus {
  hostS: number;
  volts: number;
  amps: number;
  celsius: number;
  chargeAh: number;
  energyWh: number;
  state: string;
}

/** h:mm:ss of run time. */
export function formatElapsed(seconds: number): string {
  const s = Math.max(0, Math.floor(seconds));
  const h = Math.floor(s / 3600);
  const m = Math.floor((s % 3600) / 60);
  return `${h}:${String(m).padStart(2, '0')}:${String(s % 60).padStart(2, '0')}`;
}

/** One line: what someone glancing at the terminal needs. */
export function formatStatus(x: LiveStatus): string {
  const t = Number.isFinite(x.celsius) ? `${x.celsius.toFixed(1)} °C` : 'NTC ?';
  return [
    x.state.padEnd(11),
    `${x.volts.toFixed(3)} V`,
    `${x.amps.toFixed(3)} A`,
    `${(x.chargeAh * 1000).toFixed(1)} mAh`,
    `${x.energyWh.toFixed(3)} Wh`,
    t,
    formatElapsed(x.hostS),
  ].join('  ');
}

/**
 * Redraws the status in place on a terminal; elsewhere (a log, a pipe) prints a line now and
 * then so the output stays readable.
 */
export class StatusPrinter {
  private lastAt = -Infinity;
  private latest: LiveStatus | null = null;
  private drawn = false;

  constructor(
    private readonly out: NodeJS.WritableStream & { isTTY?: boolean },
    private readonly pipeEveryMs = 10_000,
  ) {}

  update(x: LiveStatus): void {
    this.latest = x;
  }

  /** Called on a real-time timer. */
  draw(realNowMs: number): void {
    if (!this.latest) return;
    if (this.out.isTTY) {
      this.out.write(`\r\x1b[2K${formatStatus(this.latest)}`);
      this.drawn = true;
    } else if (realNowMs - this.lastAt >= this.pipeEveryMs) {
      this.lastAt = realNowMs;
      this.out.write(`${formatStatus(this.latest)}\n`);
    }
  }

  /** Prints a whole line (an event), keeping the status line below it. */
  line(text: string): void {
    if (this.out.isTTY && this.drawn) this.out.write('\r\x1b[2K');
    this.out.write(`${text}\n`);
    this.drawn = false;
  }

  /** Leaves the last status on its own line. */
  end(): void {
    if (this.out.isTTY && this.latest) this.out.write(`\r\x1b[2K${formatStatus(this.latest)}\n`);
    this.drawn = false;
  }
}
