import type { ErrorObject } from 'ajv';
import { ErrorCodes, makeError, type CellvigilError } from './errors.js';

/** What a file's own schema adds to the generic messages: the fixes only it can name. */
export interface SchemaErrorHints {
  /** The kind of file, as the user knows it ("simulator scenario", "station file"). */
  what: string;
  /** The fix for a string that does not match its pattern. */
  pattern: string;
  /** The fix when no better one is known, e.g. the shipped example to compare with. */
  fallback: string;
}

/** A key below `parent` as the user would look for it; odd names (spaces, punctuation) quoted. */
function childKey(parent: string, child: string): string {
  const shown = /^[A-Za-z0-9_-]+$/.test(child) ? child : JSON.stringify(child);
  return parent === '(top level)' ? shown : `${parent}.${shown}`;
}

/** An ajv error as a configuration error naming the file, the key as written and the fix. */
export function schemaError(
  file: string,
  err: ErrorObject,
  hints: SchemaErrorHints,
): CellvigilError {
  const key = err.instancePath.split('/').filter(Boolean).join('.') || '(top level)';
  const p = err.params as Record<string, unknown>;
  let fix: string;
  let where = key;
  switch (err.keyword) {
    case 'required':
      where = childKey(key, String(p.missingProperty));
      fix = `Add the key "${String(p.missingProperty)}".`;
      break;
    case 'additionalProperties': {
      where = childKey(key, String(p.additionalProperty));
      const allowed = Object.keys((err.parentSchema?.properties as object | undefined) ?? {});
      fix = `Remove or rename ${JSON.stringify(String(p.additionalProperty))}; the keys allowed here are: ${allowed.join(', ')}.`;
      break;
    }
    case 'type':
      fix = `Make it a ${String(p.type)}.`;
      break;
    case 'minimum':
    case 'maximum':
    case 'exclusiveMinimum':
    case 'exclusiveMaximum':
      fix = `Use a value ${String(p.comparison)} ${String(p.limit)}.`;
      break;
    case 'enum':
      fix = `Use one of: ${(p.allowedValues as unknown[]).join(', ')}.`;
      break;
    case 'oneOf': {
      const keys = (err.schema as Array<{ required?: string[] }>).flatMap(
        (alt) => alt.required ?? [],
      );
      fix = keys.length > 0 ? `Give exactly one of: ${keys.join(', ')}.` : hints.fallback;
      break;
    }
    case 'pattern':
    case 'propertyNames':
      fix = hints.pattern;
      break;
    case 'minLength':
    case 'maxLength':
      fix = `Give between ${err.parentSchema?.minLength ?? 0} and ${err.parentSchema?.maxLength ?? 'any number of'} characters.`;
      break;
    default:
      fix = hints.fallback;
  }
  return makeError(
    ErrorCodes.CONFIG_INVALID,
    `invalid ${hints.what} setting: ${key} ${err.message ?? ''}`.trim(),
    `${file}, key ${where}`,
    fix,
  );
}
