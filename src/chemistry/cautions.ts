import type { ChemistryProfile } from '../chemistry/chemistry-types.js';

/**
 * The general cautions printed at the start of every run (docs/safety.md has the full text),
 * each with the topic it covers: a chemistry's own caution on the same topic says it more
 * precisely, and the general one is then left out rather than printed twice.
 */
const GENERAL: ReadonlyArray<{ text: string; topic: RegExp }> = [
  {
    text: 'Cells can vent, burn or leak; the load resistor and MOSFET get hot. Run on a fire-safe surface, clear of anything flammable.',
    topic: /fire-safe|flammable/i,
  },
  {
    text: 'Fuse every cell or pack close to its terminals. Check the polarity before connecting.',
    topic: /\bfuse\b/i,
  },
  {
    text: 'Stop at once if a cell swells, hisses, vents, smells or gets hot. Software cannot see that; you can.',
    topic: /stop at once/i,
  },
  {
    text: "The cell maker's datasheet, local codes and licensed practice take precedence over these limits.",
    topic: /datasheet/i,
  },
];

export const GENERAL_CAUTIONS: readonly string[] = GENERAL.map((g) => g.text);

/** The general cautions the chemistry does not cover itself, then the chemistry's own; no line twice. */
export function cautionLines(chemistry: ChemistryProfile): string[] {
  const own = chemistry.cautions;
  const general = GENERAL.filter((g) => !own.some((c) => g.topic.test(c))).map((g) => g.text);
  // The polarity check rides on the fuse line; keep it when a chemistry's fuse line replaces that.
  const fuseCovered = !general.includes(GENERAL[1]!.text);
  const polarity = fuseCovered ? ['Check the polarity before connecting.'] : [];
  return [...new Set([...general, ...polarity, ...own])];
}
