/* Chemistry profiles as values; reading and checking the file is in chemistry-file.ts. */
import { ErrorCodes, makeError } from '../core/errors.js';
import type { ChemistryProfile } from './chemistry-types.js';

/** The per-cell voltage fields of a profile, in the order they are checked and shown. */
export const SOURCED_FIELDS = [
  'nominal_V_per_cell',
  'cutoff_V_per_cell',
  'floor_V_per_cell',
  'max_rest_V_per_cell',
  'min_rest_V_per_cell',
  'max_temperature_C',
] as const;

export type SourcedField = (typeof SOURCED_FIELDS)[number];

/** Finds a profile by id; a usage error listing the known ids otherwise. */
export function findChemistry(
  profiles: readonly ChemistryProfile[],
  id: string,
  where = '--chemistry',
): ChemistryProfile {
  const found = profiles.find((p) => p.id === id);
  if (found !== undefined) return found;
  throw makeError(
    ErrorCodes.USAGE,
    `Unknown chemistry "${id}"`,
    where,
    `Use one of: ${profiles.map((p) => p.id).join(', ')} (\`cellvigil chemistries\` lists them).`,
  );
}
