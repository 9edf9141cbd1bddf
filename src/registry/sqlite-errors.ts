/** SQLite's failures as the product's errors: what went wrong with the registry, and what to do. */
import { CellvigilError, ErrorCodes, makeError } from '../core/errors.js';

const REBUILD =
  'No run is lost: the run folders are the record, and `cellvigil cells rebuild <runs folder>` files them again.';

/** Maps an error thrown by better-sqlite3 (or the file system under it) to a CellvigilError. */
export function registryError(e: unknown, path: string, doing: string): CellvigilError {
  if (e instanceof CellvigilError) return e;
  const code = String((e as { code?: unknown }).code ?? '');
  const text = (e as Error).message ?? String(e);
  if (code.startsWith('SQLITE_BUSY') || code.startsWith('SQLITE_LOCKED'))
    return makeError(
      ErrorCodes.REGISTRY_LOCKED,
      `the registry is locked by another process while ${doing}`,
      path,
      `Wait for the other cellvigil command to finish and try again. ${REBUILD}`,
    );
  if (code === 'SQLITE_FULL' || code === 'ENOSPC')
    return makeError(
      ErrorCodes.REGISTRY_WRITE,
      `the disk is full while ${doing} (${text})`,
      path,
      `Free some space on the registry's disk and try again. ${REBUILD}`,
    );
  // A full disk can also show as a failed write of the WAL or its shared-memory index.
  if (code.startsWith('SQLITE_IOERR'))
    return makeError(
      ErrorCodes.REGISTRY_WRITE,
      `a disk write failed while ${doing} (${code}): the disk is full or failing`,
      path,
      `Free some space on the registry's disk (or check the disk) and try again. ${REBUILD}`,
    );
  if (
    code === 'SQLITE_CANTOPEN' ||
    code === 'SQLITE_NOTADB' ||
    code === 'SQLITE_CORRUPT' ||
    code === 'EACCES' ||
    code === 'ENOTDIR'
  )
    return makeError(
      ErrorCodes.REGISTRY_OPEN,
      `the registry cannot be opened while ${doing}: ${text}`,
      path,
      `Give a writable file with --registry; a damaged registry can be moved aside and rebuilt. ${REBUILD}`,
    );
  return makeError(
    ErrorCodes.REGISTRY_WRITE,
    `the registry failed while ${doing}: ${code ? `${code} ` : ''}${text}`,
    path,
    `Check the disk and the file's permissions. ${REBUILD}`,
  );
}
