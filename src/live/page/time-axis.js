/* cellvigil live page: the elapsed-time axis. Ticks fall on round steps (seconds, minutes,
   hours), and each label shows the unit its step needs, so two ticks never read alike. */
'use strict';

(() => {
  /** Tick steps in seconds: round ones only, so labels stay short and exact. */
  const STEPS = [
    1, 2, 5, 10, 15, 20, 30, 60, 120, 300, 600, 900, 1200, 1800, 3600, 7200, 10800, 21600, 43200,
    86400,
  ];

  const two = (n) => String(n).padStart(2, '0');

  /** One label for `s` seconds, at the resolution a tick step of `step` seconds needs. */
  function label(s, step) {
    const t = Math.max(0, Math.round(s));
    const h = Math.floor(t / 3600);
    const m = Math.floor((t % 3600) / 60);
    const sec = t % 60;
    if (step < 60) return h > 0 ? `${h}:${two(m)}:${two(sec)}` : `${m}:${two(sec)}`;
    if (step < 3600) return h > 0 ? `${h}h${two(m)}` : `${m}m`;
    return `${h}h`;
  }

  /** Labels for uPlot's axis `values`: the step is read from the ticks themselves. */
  function labels(splits) {
    const ticks = splits.filter((s) => s != null);
    const step = ticks.length > 1 ? ticks[1] - ticks[0] : 60;
    return splits.map((s) => (s == null ? '' : label(s, step)));
  }

  globalThis.cvTimeAxis = { STEPS, label, labels };
})();
