/**
 * Every failure the product reports carries a stable code (listed in DEVELOPERS.md) and a
 * message that says what was wrong, where, and what to do.
 */
export const ErrorCodes = {
  CONFIG_READ: 'CV_CONFIG_READ',
  CONFIG_INVALID: 'CV_CONFIG_INVALID',
  USAGE: 'CV_USAGE',
  CUTOFF_BELOW_FLOOR: 'CV_CUTOFF_BELOW_FLOOR',
  PRECHECK_REFUSED: 'CV_PRECHECK_REFUSED',
  BEYOND_RANGE: 'CV_BEYOND_RANGE',
  PORT_OPEN: 'CV_PORT_OPEN',
  PORT_BUSY: 'CV_PORT_BUSY',
  RIG_SILENT: 'CV_RIG_SILENT',
  LOAD_NOT_CONFIRMED: 'CV_LOAD_NOT_CONFIRMED',
  RUN_FOLDER: 'CV_RUN_FOLDER',
  CALIBRATION_INVALID: 'CV_CALIBRATION_INVALID',
  CALIBRATION_FIT: 'CV_CALIBRATION_FIT',
  CALIBRATION_WRITE: 'CV_CALIBRATION_WRITE',
  CALIBRATION_CAPTURE: 'CV_CALIBRATION_CAPTURE',
  TOKEN_FILE: 'CV_TOKEN_FILE',
  LIVE_UNPROTECTED: 'CV_LIVE_UNPROTECTED',
  LIVE_LISTEN: 'CV_LIVE_LISTEN',
  WATCH_REFUSED: 'CV_WATCH_REFUSED',
  WATCH_UNREACHABLE: 'CV_WATCH_UNREACHABLE',
  RUN_DATA: 'CV_RUN_DATA',
  REGISTRY_OPEN: 'CV_REGISTRY_OPEN',
  REGISTRY_LOCKED: 'CV_REGISTRY_LOCKED',
  REGISTRY_WRITE: 'CV_REGISTRY_WRITE',
  REGISTRY_CSV: 'CV_REGISTRY_CSV',
  REGISTRY_DUPLICATE: 'CV_REGISTRY_DUPLICATE',
  REGISTRY_UNKNOWN_CELL: 'CV_REGISTRY_UNKNOWN_CELL',
  PACK_TOO_FEW_CELLS: 'CV_PACK_TOO_FEW_CELLS',
  BROKER_CONFIG: 'CV_BROKER_CONFIG',
  RIG_INCAPABLE: 'CV_RIG_INCAPABLE',
  RIG_CAPABILITIES: 'CV_RIG_CAPABILITIES',
} as const;

export type ErrorCode = (typeof ErrorCodes)[keyof typeof ErrorCodes];

export class CellvigilError extends Error {
  readonly code: ErrorCode;
  /** Exit code of the command this error ends: 2 for usage/configuration, 1 otherwise. */
  readonly exitCode: number;

  constructor(code: ErrorCode, message: string, exitCode = 1) {
    super(message);
    this.name = 'CellvigilError';
    this.code = code;
    this.exitCode = exitCode;
  }
}

/** The one place errors are made. `what` is the problem, `where` the file/key/option, `fix` what to do. */
export function makeError(
  code: ErrorCode,
  what: string,
  where: string,
  fix: string,
): CellvigilError {
  const usage =
    code === ErrorCodes.CONFIG_READ ||
    code === ErrorCodes.CONFIG_INVALID ||
    code === ErrorCodes.USAGE ||
    code === ErrorCodes.CUTOFF_BELOW_FLOOR ||
    code === ErrorCodes.PRECHECK_REFUSED ||
    code === ErrorCodes.BEYOND_RANGE ||
    code === ErrorCodes.CALIBRATION_INVALID ||
    code === ErrorCodes.TOKEN_FILE ||
    code === ErrorCodes.LIVE_UNPROTECTED ||
    code === ErrorCodes.WATCH_REFUSED ||
    code === ErrorCodes.REGISTRY_CSV ||
    code === ErrorCodes.REGISTRY_DUPLICATE ||
    code === ErrorCodes.REGISTRY_UNKNOWN_CELL ||
    code === ErrorCodes.PACK_TOO_FEW_CELLS ||
    code === ErrorCodes.BROKER_CONFIG ||
    code === ErrorCodes.RIG_INCAPABLE;
  return new CellvigilError(code, `${what} (${where}). ${fix}`, usage ? 2 : 1);
}
