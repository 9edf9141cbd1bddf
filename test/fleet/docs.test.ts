/**
 * docs/fleet.md is the contract other programs are written against: its schemas must be the
 * ones the code validates with, its examples must validate, and its ACL must be the one the
 * broker tests run with.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { FLEET_SCHEMAS, parsePayload } from '../../src/fleet/payloads.js';
import { FLEET_ACL } from './mosquitto.js';

const doc = readFileSync(new URL('../../docs/fleet.md', import.meta.url), 'utf8');

function block(after: RegExp): string {
  const m = new RegExp(`${after.source}[^\\n]*\\n+\`\`\`json[^\\n]*\\n([\\s\\S]*?)\\n\`\`\``).exec(
    doc,
  );
  if (!m) throw new Error(`no JSON block after ${after.source} in docs/fleet.md`);
  return m[1]!;
}

describe('docs/fleet.md', () => {
  it('prints every payload schema exactly as the code validates with it', () => {
    for (const [kind, schema] of Object.entries(FLEET_SCHEMAS))
      expect(JSON.parse(block(new RegExp(`### \`${kind}\`:`))), kind).toEqual(schema);
  });

  it('has examples that validate', () => {
    for (const kind of ['sample', 'status'] as const) {
      const text = /```json example-(\w+)\n([\s\S]*?)\n```/g;
      const found = [...doc.matchAll(text)].find((m) => m[1] === kind);
      expect(found, kind).toBeDefined();
      expect(parsePayload(kind, Buffer.from(found![2]!))).toMatchObject({ ok: true });
    }
  });

  it('shows the ACL the broker tests use', () => {
    const shown = FLEET_ACL.trim()
      .split('\n')
      .map((l) => (l ? `    ${l}` : ''))
      .join('\n');
    expect(doc).toContain(shown);
  });
});
