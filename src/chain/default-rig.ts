import { packagePath } from '../core/paths.js';

/** The rig profile used when none is given: the package's bench rig. */
export const DEFAULT_RIG_PATH = packagePath('config/rigs/bench-20mohm.yaml');
