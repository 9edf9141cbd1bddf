import type { ChemistryProfile } from '../chemistry/chemistry-types.js';

/** The cautions printed at the start of every run; docs/safety.md has the full text. */
export const GENERAL_CAUTIONS = [
  'Cells can vent, burn or leak; the load resistor and MOSFET get hot. Run on a fire-safe surface, clear of anything flammable.',
  'Fuse every cell or pack close to its terminals. Check the polarity before connecting.',
  'Stop at once if a cell swells, hisses, vents, smells or gets hot. Software cannot see that; you can.',
  "The cell maker's datasheet, local codes and licensed practice take precedence over these limits.",
];

export function cautionLines(chemistry: ChemistryProfile): string[] {
  return [...GENERAL_CAUTIONS, ...chemistry.cautions];
}
