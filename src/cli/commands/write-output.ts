import { writeFile } from 'node:fs/promises';
import { ErrorCodes, makeError } from '../../core/errors.js';

/** Writes an export (CSV or HTML) a command was asked for; a failure names the file. */
export async function writeOutput(path: string, text: string): Promise<void> {
  try {
    await writeFile(path, text);
  } catch (e) {
    throw makeError(
      ErrorCodes.REGISTRY_WRITE,
      `cannot write the file: ${(e as Error).message}`,
      path,
      'Give a path in a writable folder with free space.',
    );
  }
}
