/**
 * The smallest spread of any balanced partition, by trying them all: the reference the
 * partitioning heuristic is checked against on small cases. Groups are filled in order and an
 * empty group is only ever opened first, so each partition is seen once.
 */
export function exhaustiveBestSpread(values: readonly number[], groups: number): number {
  const per = values.length / groups;
  const sums = new Array<number>(groups).fill(0);
  const counts = new Array<number>(groups).fill(0);
  let best = Infinity;
  const place = (i: number): void => {
    if (i === values.length) {
      best = Math.min(best, Math.max(...sums) - Math.min(...sums));
      return;
    }
    let openedEmpty = false;
    for (let g = 0; g < groups; g++) {
      if (counts[g] === per) continue;
      if (counts[g] === 0) {
        if (openedEmpty) continue;
        openedEmpty = true;
      }
      counts[g]!++;
      sums[g]! += values[i]!;
      place(i + 1);
      counts[g]!--;
      sums[g]! -= values[i]!;
    }
  };
  place(0);
  return best;
}
