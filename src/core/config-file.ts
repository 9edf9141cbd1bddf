import { readFile } from 'node:fs/promises';
import { parse as parseYaml } from 'yaml';
import { ErrorCodes, makeError } from './errors.js';

/** Reads a configuration file as text; a failure says which file, what it is for, and what to check. */
export async function readConfigText(path: string, what: string, fix: string): Promise<string> {
  try {
    return await readFile(path, 'utf8');
  } catch (err) {
    throw makeError(
      ErrorCodes.CONFIG_READ,
      `cannot read the ${what}: ${(err as Error).message}`,
      path,
      fix,
    );
  }
}

/** Parses YAML (JSON is YAML too); a syntax error names the file and the line, and says what to fix. */
export function parseConfigYaml(text: string, what: string, where: string, fix: string): unknown {
  try {
    return parseYaml(text, { logLevel: 'error' });
  } catch (err) {
    const first = (err instanceof Error ? err.message : String(err)).split('\n')[0] ?? '';
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      `the ${what} is not valid YAML: ${first.replace(/:\s*$/, '')}`,
      where,
      fix,
    );
  }
}
