/** Durations written the way people write them: `15 s`, `1 min`, `4 h`, `1.5h`, `2 days`. */

const UNIT_MS: Record<string, number> = {
  ms: 1,
  s: 1000,
  sec: 1000,
  second: 1000,
  seconds: 1000,
  min: 60_000,
  mins: 60_000,
  minute: 60_000,
  minutes: 60_000,
  h: 3_600_000,
  hr: 3_600_000,
  hrs: 3_600_000,
  hour: 3_600_000,
  hours: 3_600_000,
  d: 86_400_000,
  day: 86_400_000,
  days: 86_400_000,
};

export const DURATION_PATTERN = `^\\s*(\\d+(?:\\.\\d+)?|\\.\\d+)\\s*(${Object.keys(UNIT_MS).join('|')})\\s*$`;
const DURATION = new RegExp(DURATION_PATTERN, 'i');

/** Milliseconds of a duration string, or null when it is not one. A bare number is not a duration: the unit is required. */
export function parseDuration(text: string): number | null {
  const m = DURATION.exec(text);
  if (!m) return null;
  const unit = UNIT_MS[m[2]!.toLowerCase()];
  return unit === undefined ? null : Number(m[1]) * unit;
}

/** The shortest exact way to write `ms`: `15 s`, `1 min`, `8 h`, `1.5 h`. */
export function formatDuration(ms: number): string {
  if (!Number.isFinite(ms)) return 'until the end point';
  for (const [unit, size] of [
    ['h', 3_600_000],
    ['min', 60_000],
    ['s', 1000],
  ] as const) {
    if (ms >= size && Number.isInteger((ms / size) * 1000)) {
      const v = ms / size;
      if (Number.isInteger(v) || unit === 'h' || unit === 's')
        return `${Number(v.toFixed(3))} ${unit}`;
    }
  }
  return `${ms} ms`;
}
