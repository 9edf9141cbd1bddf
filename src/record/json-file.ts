/** Reading the run folder's JSON files: absent is null, present is parsed and checked by its schema. */
import { readFile } from 'node:fs/promises';
import type { ValidateFunction } from 'ajv';
import { ErrorCodes, makeError } from '../core/errors.js';

/** The schema's complaints as `key problem` phrases. */
export function schemaProblems(check: ValidateFunction): string[] {
  return (check.errors ?? []).map(
    (e) =>
      `${e.instancePath.split('/').filter(Boolean).join('.') || '(top level)'} ${e.message ?? 'is invalid'}`,
  );
}

export async function readOptional(path: string): Promise<string | null> {
  try {
    return await readFile(path, 'utf8');
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot read the file: ${(e as Error).message}`,
      path,
      'Check the permissions of the run folder.',
    );
  }
}

export function parseChecked<T>(
  text: string,
  path: string,
  check: ValidateFunction,
  fix: string,
): T {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (e) {
    throw makeError(ErrorCodes.RUN_DATA, `not valid JSON: ${(e as Error).message}`, path, fix);
  }
  if (!check(data))
    throw makeError(
      ErrorCodes.RUN_DATA,
      `malformed: ${schemaProblems(check).join('; ')}`,
      path,
      fix,
    );
  return data as T;
}
