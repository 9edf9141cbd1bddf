import { Ajv } from 'ajv';
import { parseConfigYaml } from '../core/config-file.js';
import { buildSchedule, invalidSchedule, type Schedule } from './schedule.js';
import { SCHEDULE_KEYS, SCHEDULE_SCHEMA, type ScheduleSpec } from './schedule-schema.js';

/* Reading a schedule file: YAML, then the schema, then the pure builder in schedule.ts. */

const validate = new Ajv({ allErrors: false, strict: true, allowUnionTypes: true }).compile(
  SCHEDULE_SCHEMA,
);

/** Parses and validates schedule YAML; `where` names the file in messages. */
export function parseScheduleYaml(text: string, where: string): Schedule {
  const data = parseConfigYaml(text, 'schedule', where, 'Fix the YAML syntax at the line shown.');
  if (!validate(data)) {
    const e = validate.errors?.[0];
    const key = e?.instancePath.split('/').filter(Boolean).join('.') ?? '';
    if (e?.keyword === 'additionalProperties') {
      const extra = String((e.params as { additionalProperty: string }).additionalProperty);
      throw invalidSchedule(
        `${key ? `${key}.` : ''}${extra} is not a schedule key`,
        where,
        `Use the keys ${Object.keys(SCHEDULE_KEYS).join(', ')} (docs/schedules.md).`,
      );
    }
    if (key === '' && e?.keyword === 'type')
      throw invalidSchedule(
        'the schedule must be a YAML mapping',
        where,
        'Start from an example in docs/schedules.md.',
      );
    const top = key.split('.')[0] ?? '';
    throw invalidSchedule(
      `${key || '(top level)'} ${e?.message ?? 'is invalid'}`,
      where,
      `Set ${key} to ${SCHEDULE_KEYS[top] ?? 'a valid value'}.`,
    );
  }
  return buildSchedule(data as ScheduleSpec, where);
}
