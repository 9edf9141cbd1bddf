/** Where the registry lives unless told otherwise: beside the runs folder. */
import { dirname, join, resolve } from 'node:path';

export const REGISTRY_FILE_NAME = 'cellvigil-registry.sqlite';

/** `runs/` → `./cellvigil-registry.sqlite`; `/data/lab/runs` → `/data/lab/cellvigil-registry.sqlite`. */
export function defaultRegistryPath(runsDir = 'runs'): string {
  return join(dirname(resolve(runsDir)), REGISTRY_FILE_NAME);
}
