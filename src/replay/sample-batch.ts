/**
 * Sample rows as a worker thread hands them over (sample-worker.ts writes them, the client
 * reads them): numbers in one typed array, the strings as places in a short list of the batch's
 * own, so a batch of thousands of rows is two transferred buffers and a few strings rather than
 * thousands of cloned objects.
 */
import { CellvigilError, type ErrorCode } from '../core/errors.js';
import { MILLI_Z, type SampleReader, type SampleRecord } from './sample-csv.js';
import type { CutLine } from './sample-visit.js';

/** Rows per message. */
export const BATCH_ROWS = 4096;
/** Numbers per row: the record's thirteen, then the wall time's millisecond (-1 for none). */
const NUMBERS = 14;
/** Places per row in the batch's strings: state, calibration id, wall time (or its second). */
const PLACES = 3;

export interface RowsMessage {
  kind: 'rows';
  count: number;
  numbers: Float64Array;
  places: Int32Array;
  /** The batch's states, each once where rows repeat it; so the ids and the wall times. */
  states: string[];
  ids: string[];
  /** Wall times, or the seconds they start with. */
  walls: string[];
}

/** A fault while reading, as it crosses between threads (an Error is cloned without its class). */
export interface ErrorShape {
  message: string;
  code: string | null;
  exitCode: number | null;
}

/**
 * Everything a worker says, file by file: rows, a cut line, the end of a file, or the fault
 * that stopped it. `bytes` is file bytes read since its last message.
 */
export type WorkerMessage = { bytes: number } & (
  | RowsMessage
  | { kind: 'cut'; cut: CutLine }
  | { kind: 'file-done' }
  | { kind: 'error'; error: ErrorShape }
);

export function errorShape(e: unknown): ErrorShape {
  if (e instanceof CellvigilError)
    return { message: e.message, code: e.code, exitCode: e.exitCode };
  const code = (e as { code?: unknown } | null)?.code;
  return {
    message: e instanceof Error ? e.message : String(e),
    code: typeof code === 'string' ? code : null,
    exitCode: null,
  };
}

/** The fault again, of the class it was thrown as. */
export function errorFrom(s: ErrorShape): Error {
  if (s.exitCode !== null && s.code !== null)
    return new CellvigilError(s.code as ErrorCode, s.message, s.exitCode);
  return Object.assign(new Error(s.message), s.code !== null ? { code: s.code } : {});
}

/** Strings of a batch: each row's place in them; a row repeating the row before's string reuses its place. */
class BatchTexts {
  list: string[] = [];
  private last = '';
  private place = -1;

  placeOf(text: string): number {
    if (text !== this.last || this.place < 0) {
      this.last = text;
      this.place = this.list.push(text) - 1;
    }
    return this.place;
  }
}

/**
 * Gathers rows into batches and hands each full one to `send` with the buffers to transfer. The
 * wall time goes as the reader made it, the text of its second and its millisecond, so no
 * string is built per row here nor copied per row between the threads.
 */
export class RowPacker {
  private numbers: Float64Array;
  private places: Int32Array;
  private states = new BatchTexts();
  private ids = new BatchTexts();
  private walls = new BatchTexts();
  private count = 0;

  constructor(
    private readonly send: (m: RowsMessage, transfer: ArrayBuffer[]) => void,
    private readonly reader: Pick<SampleReader, 'wallMilli' | 'wallSecond'>,
    private readonly batchRows = BATCH_ROWS,
  ) {
    this.numbers = new Float64Array(batchRows * NUMBERS);
    this.places = new Int32Array(batchRows * PLACES);
  }

  add(r: Readonly<SampleRecord>): void {
    const n = this.numbers;
    const c = this.count;
    const k = c * NUMBERS;
    n[k] = r.hostS;
    n[k + 1] = r.channel;
    n[k + 2] = r.seq;
    n[k + 3] = r.tickMs;
    n[k + 4] = r.vRaw;
    n[k + 5] = r.iRaw;
    n[k + 6] = r.tRaw;
    n[k + 7] = r.flags;
    n[k + 8] = r.volts;
    n[k + 9] = r.amps;
    n[k + 10] = r.celsius;
    n[k + 11] = r.chargeAh;
    n[k + 12] = r.energyWh;
    const milli = this.reader.wallMilli;
    n[k + 13] = milli;
    const p = c * PLACES;
    this.places[p] = this.states.placeOf(r.state);
    this.places[p + 1] = this.ids.placeOf(r.calibrationId);
    this.places[p + 2] = this.walls.placeOf(milli >= 0 ? this.reader.wallSecond : r.wallTime);
    this.count = c + 1;
    if (this.count === this.batchRows) this.flush();
  }

  /** Sends the rows gathered so far, if any. */
  flush(): void {
    if (this.count === 0) return;
    const m: RowsMessage = {
      kind: 'rows',
      count: this.count,
      numbers: this.numbers,
      places: this.places,
      states: this.states.list,
      ids: this.ids.list,
      walls: this.walls.list,
    };
    this.numbers = new Float64Array(this.batchRows * NUMBERS);
    this.places = new Int32Array(this.batchRows * PLACES);
    this.states = new BatchTexts();
    this.ids = new BatchTexts();
    this.walls = new BatchTexts();
    this.count = 0;
    this.send(m, [m.numbers.buffer, m.places.buffer] as ArrayBuffer[]);
  }
}

/** Most states and calibration ids a reader keeps one copy of (a run has a handful). */
const KEPT_TEXTS = 64;

/**
 * Reads the batches of one worker into one reused record, row after row. A string comes out
 * of each message as a copy of its own: the states and ids are swapped for one kept copy, so
 * the visitor compares them as it would the reader's own (the same string, not equal text).
 */
export class RowUnpacker {
  private readonly kept = new Map<string, string>();

  take(m: RowsMessage, row: SampleRecord, visit: (row: Readonly<SampleRecord>) => void): void {
    if (this.kept.size > KEPT_TEXTS) this.kept.clear();
    unpackRows(m, m.states.map(this.keep), m.ids.map(this.keep), row, visit);
  }

  private readonly keep = (t: string): string => {
    const have = this.kept.get(t);
    if (have !== undefined) return have;
    this.kept.set(t, t);
    return t;
  };
}

function unpackRows(
  m: RowsMessage,
  states: readonly string[],
  ids: readonly string[],
  row: SampleRecord,
  visit: (row: Readonly<SampleRecord>) => void,
): void {
  const n = m.numbers;
  const places = m.places;
  const walls = m.walls;
  for (let c = 0; c < m.count; c++) {
    const k = c * NUMBERS;
    row.hostS = n[k]!;
    row.channel = n[k + 1]!;
    row.seq = n[k + 2]!;
    row.tickMs = n[k + 3]!;
    row.vRaw = n[k + 4]!;
    row.iRaw = n[k + 5]!;
    row.tRaw = n[k + 6]!;
    row.flags = n[k + 7]!;
    row.volts = n[k + 8]!;
    row.amps = n[k + 9]!;
    row.celsius = n[k + 10]!;
    row.chargeAh = n[k + 11]!;
    row.energyWh = n[k + 12]!;
    const milli = n[k + 13]!;
    const p = c * PLACES;
    row.state = states[places[p]!]!;
    row.calibrationId = ids[places[p + 1]!]!;
    const wall = walls[places[p + 2]!]!;
    row.wallTime = milli >= 0 ? wall + MILLI_Z[milli]! : wall;
    visit(row);
  }
}
