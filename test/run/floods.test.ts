import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { frameLine } from '../../src/protocol/codec.js';
import { RIG_LINES_PER_MINUTE } from '../../src/record/event-log.js';
import { MARK_MAX_CHARS, MARKS_PER_MINUTE } from '../../src/run/channel-run.js';
import { channelRun } from './channel-run-helper.js';

function events(folder: string): { event: string; [k: string]: unknown }[] {
  return readFileSync(join(folder, 'events.jsonl'), 'utf8')
    .trim()
    .split('\n')
    .map((l) => JSON.parse(l) as { event: string });
}

// 115 200 baud with 8N1 framing carries 11 520 bytes a second (common practice: 10 bit times a
// byte); an acknowledgement line `A,BEAT|xxxx` is 12 bytes, so some 960 a second.
describe('floods from the rig and from viewers', () => {
  it('rig E, H and A lines at the full rate of the link: the first few a minute in full, the rest counted in a summary', async () => {
    const { run, clock, folder } = await channelRun();
    const lines = [frameLine('A,BEAT'), frameLine('E,NOISE,again'), frameLine('H,r1,fw,12,1')];
    const perSecond = 960;
    const seconds = 125;
    for (let s = 0; s < seconds; s++) {
      for (let k = 0; k < perSecond; k++) run.line(lines[k % 3]!.trimEnd());
      clock.advance(1000);
    }
    run.stop('test');
    await run.done;
    const log = events(folder);
    const full = log.filter((e) => ['rig_ack', 'rig_error', 'rig_hello'].includes(e.event));
    const summaries = log.filter((e) => e.event === 'rig_lines_summary');
    // Three minutes begun (0, 60 and 120 s), three kinds; a summary after each, the last at the end.
    expect(full.length).toBe(3 * 3 * RIG_LINES_PER_MINUTE);
    expect(summaries.length).toBe(3);
    const counted = summaries.reduce(
      (t, e) =>
        t +
        Object.values(e['not_logged_by_kind'] as Record<string, number>).reduce((a, b) => a + b),
      0,
    );
    // Every line is either in full or in a summary.
    expect(full.length + counted).toBe(perSecond * seconds);
  });

  it('marks: a note longer than the cap and marks beyond the rate are refused, with the reason', async () => {
    const { run, folder } = await channelRun();
    expect(run.mark('x'.repeat(MARK_MAX_CHARS + 1), 'test')).toMatchObject({ ok: false });
    const replies = Array.from({ length: 1000 }, (_, k) => run.mark(`note ${k}`, 'test'));
    expect(replies.filter((r) => r.ok)).toHaveLength(MARKS_PER_MINUTE);
    expect(replies.at(-1)).toMatchObject({ ok: false, error: expect.stringMatching(/a minute/) });
    await run.flush();
    expect(events(folder).filter((e) => e.event === 'mark')).toHaveLength(MARKS_PER_MINUTE);
  });
});
