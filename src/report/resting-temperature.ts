/**
 * The cell's temperature at rest before a load goes on, as the rated-capacity check takes its
 * start temperature: the mean of the last few readings with nothing on. Bounded.
 */
const READINGS = 10;

export class RestingTemperature {
  private readonly last: number[] = [];

  /** A reading with nothing on, °C; one that is not a number is left out. */
  add(celsius: number): void {
    if (!Number.isFinite(celsius)) return;
    this.last.push(celsius);
    if (this.last.length > READINGS) this.last.shift();
  }

  /** The mean of the readings kept, °C, or null before any came. */
  mean(): number | null {
    const t = this.last;
    return t.length > 0 ? t.reduce((a, b) => a + b, 0) / t.length : null;
  }
}
