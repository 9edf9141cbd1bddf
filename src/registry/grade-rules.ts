/** The grade rules file (config/grades.yaml by default), checked with a schema. */
import { Ajv, type SchemaObject } from 'ajv';
import { ErrorCodes, makeError } from '../core/errors.js';
import { parseConfigYaml, readConfigText } from '../core/config-file.js';
import { packagePath } from '../core/paths.js';
import type { GradeRules } from './grading.js';

export const DEFAULT_GRADES_FILE = packagePath('config/grades.yaml');

const share = { type: 'number', exclusiveMinimum: 0, maximum: 2 };

const SCHEMA: SchemaObject = {
  type: 'object',
  additionalProperties: false,
  required: ['trust', 'chemistries'],
  properties: {
    trust: {
      type: 'object',
      additionalProperties: false,
      required: ['min_runs', 'max_relative_uncertainty', 'require_calibration'],
      properties: {
        min_runs: { type: 'integer', minimum: 1 },
        max_relative_uncertainty: { type: 'number', exclusiveMinimum: 0 },
        require_calibration: { type: 'boolean' },
      },
    },
    chemistries: {
      type: 'object',
      additionalProperties: {
        type: 'object',
        additionalProperties: false,
        required: ['grades'],
        properties: {
          grades: {
            type: 'array',
            minItems: 1,
            items: {
              type: 'object',
              additionalProperties: false,
              required: ['grade', 'min_capacity_share'],
              properties: {
                grade: { type: 'string', pattern: '^[A-Za-z0-9+_-]{1,16}$' },
                min_capacity_share: share,
                max_resistance_ohm: { type: 'number', exclusiveMinimum: 0 },
              },
            },
          },
        },
      },
    },
  },
};

const validate = new Ajv({ allErrors: true, strict: true }).compile(SCHEMA);
const FIX = 'Correct the key named; config/grades.yaml shows the layout.';

export function parseGradeRules(text: string, where: string): GradeRules {
  const data = parseConfigYaml(text, 'grade rules', where, FIX);
  if (!validate(data)) {
    const problems = (validate.errors ?? []).map(
      (e) =>
        `${e.instancePath.split('/').filter(Boolean).join('.') || '(top level)'} ${e.message ?? 'is invalid'}`,
    );
    throw makeError(
      ErrorCodes.CONFIG_INVALID,
      `the grade rules do not validate: ${problems.join('; ')}`,
      where,
      FIX,
    );
  }
  const rules = data as GradeRules;
  for (const [chemistry, set] of Object.entries(rules.chemistries)) {
    for (let i = 1; i < set.grades.length; i++) {
      if (set.grades[i]!.min_capacity_share > set.grades[i - 1]!.min_capacity_share)
        throw makeError(
          ErrorCodes.CONFIG_INVALID,
          `the grades of ${chemistry} must be listed best first: grade ${set.grades[i]!.grade} asks more capacity than ${set.grades[i - 1]!.grade}`,
          `${where}: chemistries.${chemistry}.grades[${i}]`,
          FIX,
        );
    }
  }
  return rules;
}

export async function loadGradeRules(path = DEFAULT_GRADES_FILE): Promise<GradeRules> {
  const text = await readConfigText(
    path,
    'grade rules',
    'Give a grade rules file with --grades (config/grades.yaml shows the layout).',
  );
  return parseGradeRules(text, path);
}
