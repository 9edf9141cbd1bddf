/**
 * Mutations for property tests: byte-level damage to any text, and field-level changes to
 * protocol lines that keep (or recompute) a correct checksum so they reach the parser behind it.
 */
import fc from 'fast-check';
import { framed } from './helpers.js';

/** One change to a text; applied in order, positions taken modulo the current length. */
export type TextMutation = (text: string) => string;

const at = (text: string, pos: number): number => (text.length === 0 ? 0 : pos % (text.length + 1));

const latin1 = fc
  .uint8Array({ minLength: 1, maxLength: 300 })
  .map((b) => Buffer.from(b).toString('latin1'));

/** Damage that ignores the text's structure: flipped bits, inserted or deleted bytes, truncation, noise. */
export const byteMutation: fc.Arbitrary<TextMutation> = fc.oneof(
  fc
    .record({ pos: fc.nat(), bit: fc.integer({ min: 0, max: 15 }) })
    .map(({ pos, bit }): TextMutation => (t) => {
      const i = at(t, pos);
      if (i >= t.length) return t;
      return t.slice(0, i) + String.fromCharCode(t.charCodeAt(i) ^ (1 << bit)) + t.slice(i + 1);
    }),
  fc
    .record({
      pos: fc.nat(),
      s: fc.oneof(
        fc.string({ unit: 'binary', maxLength: 8 }),
        latin1,
        fc.constantFrom(',', '|', '\r', '\n', '\0', ':', '{', '- ', '#', '"'),
      ),
    })
    .map(
      ({ pos, s }): TextMutation =>
        (t) =>
          t.slice(0, at(t, pos)) + s + t.slice(at(t, pos)),
    ),
  fc.record({ pos: fc.nat(), len: fc.integer({ min: 1, max: 40 }) }).map(
    ({ pos, len }): TextMutation =>
      (t) =>
        t.slice(0, at(t, pos)) + t.slice(at(t, pos) + len),
  ),
  fc.nat().map(
    (pos): TextMutation =>
      (t) =>
        t.slice(0, at(t, pos)),
  ),
  latin1.map(
    (noise): TextMutation =>
      () =>
        noise,
  ),
);

/** A field value that a lenient number parser might take, or that is out of range. */
const hostileField: fc.Arbitrary<string> = fc.oneof(
  fc.bigInt({ min: 10n ** 10n, max: 10n ** 60n }).map(String),
  fc.integer({ min: -(2 ** 31), max: -1 }).map(String),
  fc.constantFrom(
    '',
    ' 12',
    '12 ',
    '0012',
    '1.5',
    '1e3',
    '0x10',
    '+5',
    '-0',
    'NaN',
    'Infinity',
    '٣',
    '4096',
    '65536',
    '4294967296',
    '16',
    'G',
    '1FF',
    'ff',
    '00',
  ),
  fc.string({ maxLength: 12 }),
);

/** Splits a framed line into payload and checksum (or the whole text as payload). */
function payloadOf(line: string): string {
  const bar = line.lastIndexOf('|');
  return bar < 0 ? line : line.slice(0, bar);
}

/** Changes that keep a correct checksum, so the line reaches the field parser. */
export const fieldMutation: fc.Arbitrary<TextMutation> = fc.oneof(
  fc.record({ idx: fc.nat(), value: hostileField }).map(({ idx, value }): TextMutation => (t) => {
    const f = payloadOf(t).split(',');
    f[idx % f.length] = value;
    return framed(f.join(','));
  }),
  fc
    .record({ idx: fc.nat(), n: fc.integer({ min: 1, max: 3 }) })
    .map(({ idx, n }): TextMutation => (t) => {
      const f = payloadOf(t).split(',');
      f.splice(idx % (f.length + 1), 0, ...Array<string>(n).fill(''));
      return framed(f.join(','));
    }),
  fc.nat().map((idx): TextMutation => (t) => {
    const f = payloadOf(t).split(',');
    f.splice(idx % f.length, 1);
    return framed(f.join(','));
  }),
  fc
    .record({
      type: fc.constantFrom('H', 'A', 'E', 'C', 'D', 'd', 'X', '', 'DD'),
      rest: fc.array(hostileField, { maxLength: 9 }),
    })
    .map(
      ({ type, rest }): TextMutation =>
        () =>
          framed([type, ...rest].join(',')),
    ),
  // Longer than any line the protocol allows.
  fc.integer({ min: 2, max: 6 }).map(
    (n): TextMutation =>
      (t) =>
        framed(Array<string>(n).fill(payloadOf(t)).join(',')),
  ),
  // Upper and lower case checksums are both valid: a case flip must change nothing.
  fc.constant<TextMutation>((t) =>
    t.replace(
      /\|([0-9A-Fa-f]{4})$/,
      (_m, h: string) => `|${h === h.toUpperCase() ? h.toLowerCase() : h.toUpperCase()}`,
    ),
  ),
  fc.constantFrom<TextMutation>(
    (t) => `${t}\r`,
    (t) => `${t}\r\r`,
    (t) => ` ${t}`,
    (t) => `${t} `,
  ),
);

export const lineMutations: fc.Arbitrary<TextMutation[]> = fc.array(
  fc.oneof({ weight: 1, arbitrary: byteMutation }, { weight: 2, arbitrary: fieldMutation }),
  {
    minLength: 1,
    maxLength: 3,
  },
);

export function applyAll(text: string, ms: readonly TextMutation[]): string {
  return ms.reduce((t, m) => m(t), text);
}

/** A path into a parsed configuration document. */
type Path = (string | number)[];

function paths(v: unknown, prefix: Path = []): Path[] {
  if (v === null || typeof v !== 'object') return [prefix];
  const kids = Array.isArray(v)
    ? v.map((x, i) => [i, x] as const)
    : Object.entries(v as Record<string, unknown>);
  return [prefix, ...kids.flatMap(([k, x]) => paths(x, [...prefix, k]))];
}

const oddValue: fc.Arbitrary<unknown> = fc.oneof(
  fc.jsonValue({ maxDepth: 2 }),
  fc.constantFrom(
    0,
    -1,
    -0.001,
    1e308,
    -1e308,
    1e-320,
    2 ** 53 + 1,
    4096,
    25,
    24,
    7,
    8,
    100,
    101,
    '',
    ' ',
    '12',
    'low',
    'high',
    null,
    true,
    [],
    {},
  ),
  fc.double(),
);

/** A structural edit of a parsed document: remove a key, change a value, or add an unknown key. */
export const docMutation: fc.Arbitrary<(doc: unknown) => unknown> = fc.oneof(
  fc.record({ pick: fc.nat(), value: oddValue }).map(
    ({ pick, value }) =>
      (doc: unknown) =>
        setAt(doc, pick, () => value),
  ),
  fc.nat().map((pick) => (doc: unknown) => setAt(doc, pick, () => undefined)),
  fc
    .record({
      pick: fc.nat(),
      key: fc.oneof(
        fc.string({ maxLength: 10 }),
        fc.constantFrom('__proto__', 'constructor', 'value', 'source', 'bits', 'id'),
      ),
      value: oddValue,
    })
    .map(
      ({ pick, key, value }) =>
        (doc: unknown) =>
          setAt(doc, pick, (old) =>
            old !== null && typeof old === 'object' && !Array.isArray(old)
              ? { ...(old as object), [key]: value }
              : old,
          ),
    ),
);

/** Returns a copy of `doc` with the node at path number `pick` replaced (undefined removes it). */
function setAt(doc: unknown, pick: number, f: (old: unknown) => unknown): unknown {
  const all = paths(doc);
  const path = all[pick % all.length]!;
  const copy: unknown = structuredClone(doc);
  if (path.length === 0) return f(copy);
  let parent = copy as Record<string | number, unknown>;
  for (const k of path.slice(0, -1)) parent = parent[k] as Record<string | number, unknown>;
  const last = path.at(-1)!;
  const next = f(parent[last]);
  if (next === undefined) {
    if (Array.isArray(parent)) parent.splice(Number(last), 1);
    else delete parent[last];
  } else parent[last] = next;
  return copy;
}
