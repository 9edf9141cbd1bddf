import { fileURLToPath } from 'node:url';
import { readFileSync } from 'node:fs';

/**
 * The package root. Source (`src/core/`) and build (`dist/core/`) both sit two levels below
 * it, so one relative URL serves both.
 */
export const PACKAGE_ROOT: string = fileURLToPath(new URL('../../', import.meta.url));

export function packagePath(relative: string): string {
  return fileURLToPath(new URL(`../../${relative}`, import.meta.url));
}

/** The package's version, read from package.json when asked (never when a module imports this). */
export function packageVersion(): string {
  return (JSON.parse(readFileSync(packagePath('package.json'), 'utf8')) as { version: string })
    .version;
}
