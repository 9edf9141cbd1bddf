import { readFile } from 'node:fs/promises';
import { ErrorCodes, makeError } from './errors.js';

/** Reads a configuration file as text; a failure says which file, what it is for, and what to check. */
export async function readConfigText(path: string, what: string, fix: string): Promise<string> {
  try {
    return await readFile(path, 'utf8');
  } catch (err) {
    throw makeError(ErrorCodes.CONFIG_READ, `cannot read the ${what}: ${(err as Error).message}`, path, fix);
  }
}
