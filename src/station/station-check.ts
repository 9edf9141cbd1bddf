import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { resolveCutoff, validateCells } from '../chemistry/limits.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { ScenarioSet } from '../sim/scenarios.js';
import type { StationPlan } from './station-types.js';

/**
 * What the schema cannot know: chemistries and cutoffs against the chemistry profiles (never
 * below a floor), simulated rigs and their channels against the scenario file. Pure: the
 * caller loads both files. Throws the first problem, naming the station file and key.
 */
export function checkStationPlan(
  plan: StationPlan,
  chemistries: readonly ChemistryProfile[],
  scenarios: ScenarioSet,
): void {
  for (const rig of plan.rigs) {
    const at = (key: string): string => `${plan.file}, key rigs.${rig.name}${key}`;
    const simChannels =
      rig.link.kind === 'sim' ? simChannelsOf(scenarios, rig.link.name, at('.sim')) : null;
    for (const ch of rig.channels) {
      const key = `.channels.${ch.channel}`;
      if (simChannels && !simChannels.includes(ch.channel))
        throw makeError(
          ErrorCodes.CONFIG_INVALID,
          `the simulated rig "${rig.link.kind === 'sim' ? rig.link.name : ''}" has no channel ${ch.channel}`,
          at(key),
          `Use its channels: ${simChannels.join(', ')}.`,
        );
      const chemistry = findChemistry(chemistries, ch.chemistry, at(`${key}.chemistry`));
      const cells = validateCells(ch.cells ?? 1, at(`${key}.cells`));
      resolveCutoff(
        chemistry,
        cells,
        ch.cutoffVPerCell ?? undefined,
        at(`${key}.cutoff_V_per_cell`),
      );
    }
  }
}

function simChannelsOf(set: ScenarioSet, name: string, where: string): number[] {
  const multi = set.rigs.get(name);
  if (multi) return [...multi.channels.keys()];
  const one = set.byName.get(name);
  if (one) return [one.rig.channel];
  throw makeError(
    ErrorCodes.CONFIG_INVALID,
    `there is no simulated rig or scenario "${name}"`,
    where,
    `Use a rig of ${set.file} (${[...set.rigs.keys()].join(', ')}) or one of its scenarios.`,
  );
}
