/**
 * A one-line progress bar for long jobs, drawn on a terminal only: piped or logged output stays
 * free of carriage returns.
 */
export interface ProgressBar {
  update(label: string, done: number, total: number): void;
  /** Clears the line. */
  end(): void;
}

export interface ProgressStream {
  isTTY?: boolean;
  columns?: number;
  write(text: string): boolean;
}

/** Redraws at most this often. */
const REDRAW_MS = 100;

export function progressBar(
  stream: ProgressStream,
  now: () => number = () => performance.now(),
): ProgressBar {
  if (!stream.isTTY) return { update: () => undefined, end: () => undefined };
  let last = -Infinity;
  let drawn = false;
  return {
    update(label, done, total) {
      const t = now();
      if (t - last < REDRAW_MS && done < total) return;
      last = t;
      const share = total > 0 ? Math.min(1, done / total) : 0;
      const width = Math.max(10, Math.min(40, (stream.columns ?? 80) - label.length - 10));
      const filled = Math.round(share * width);
      stream.write(
        `\r\x1b[2K${label} [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${(share * 100).toFixed(0).padStart(3)} %`,
      );
      drawn = true;
    },
    end() {
      if (drawn) stream.write('\r\x1b[2K');
      drawn = false;
    },
  };
}
