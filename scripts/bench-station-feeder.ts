/**
 * The rigs of the station benchmark, in one process of their own (forked by bench-station):
 * writes protocol v1 frames into pseudo-terminals at a steady rate per channel, as rigs with
 * several channels do (one frame per channel per period, all with the same tick), and answers
 * LOAD commands with an acknowledgement and the load flag.
 *
 *   --ports <pty,pty,…>   --channels <per rig>   --rate <frames/s per channel>
 *
 * Every rig's frames of one 10 ms step go out in one write. The pty is read and written
 * through two serialport handles (see bench-feeder.ts for why).
 */
import { SerialPort } from 'serialport';
import { argValue, BENCH_CELL, benchChain, product, type CodecModule } from './bench-kit.js';

export type StationFeederToParent =
  { type: 'ready' } | { type: 'counts'; frames: number; loadsOn: number; elapsedS: number };
export type ParentToStationFeeder = { type: 'count' } | { type: 'finish' };

const STEP_MS = 10;

interface Rig {
  out: SerialPort;
  input: SerialPort;
  loadOn: boolean[];
  seq: number[];
}

const open = (path: string): Promise<SerialPort> =>
  new Promise((resolve, reject) => {
    const p = new SerialPort({ path, baudRate: 115200, autoOpen: false, lock: false });
    p.open((e) => (e ? reject(e) : resolve(p)));
  });

async function main(): Promise<void> {
  const ports = (argValue('ports') ?? '').split(',').filter(Boolean);
  const channels = Number(argValue('channels') ?? 8);
  const rate = Number(argValue('rate') ?? 20);
  const codec = await product<CodecModule>('protocol/codec.js');
  const chain = await benchChain();
  const { restV, loadedV, loadA, celsius } = BENCH_CELL;
  // Counts per state, worked out once: the feeder must never be the slow side.
  const counts = (v: number, a: number) => ({
    vRaw: Math.round(chain.countsForVolts(v)),
    iRaw: Math.round(chain.countsForAmps(a)),
    tRaw: Math.round(chain.countsForCelsius(celsius)),
  });
  const rest = counts(restV, 0);
  const loaded = counts(loadedV, loadA);

  const rigs: Rig[] = [];
  for (const path of ports) {
    const rig: Rig = {
      out: await open(path),
      input: await open(path),
      loadOn: Array.from({ length: channels }, () => false),
      seq: Array.from({ length: channels }, () => 0),
    };
    let partial = '';
    rig.input.on('data', (chunk: Buffer) => {
      const parts = (partial + chunk.toString('latin1')).split('\n');
      partial = parts.pop() ?? '';
      for (const p of parts) {
        const cmd = codec.decodeHostLine(p.replace(/\r$/, ''));
        if ('error' in cmd || cmd.command !== 'LOAD' || cmd.channel >= channels) continue;
        rig.loadOn[cmd.channel] = cmd.on;
        rig.out.write(codec.frameLine(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`));
      }
    });
    rigs.push(rig);
  }

  const t0 = performance.now();
  let frames = 0;
  let due = 0;
  const timer = setInterval(() => {
    // Frames per channel owed by now; a late timer catches up in one write.
    const target = Math.floor(((performance.now() - t0) / 1000) * rate);
    const n = target - due;
    if (n <= 0) return;
    due = target;
    for (const rig of rigs) {
      let chunk = '';
      for (let k = 0; k < n; k++) {
        // The rig's tick of the k-th period owed: every frame a period of its own.
        const tickMs = Math.round(((target - n + k + 1) * 1000) / rate);
        for (let ch = 0; ch < channels; ch++) {
          const on = rig.loadOn[ch]!;
          chunk += codec.encodeDataFrame({
            channel: ch,
            seq: rig.seq[ch]!,
            tickMs,
            ...(on ? loaded : rest),
            flags: on ? 1 : 0,
          });
          rig.seq[ch] = (rig.seq[ch]! + 1) & 0xffff;
        }
      }
      frames += n * channels;
      rig.out.write(chunk);
    }
  }, STEP_MS);

  const send = (m: StationFeederToParent): void => void process.send!(m);
  process.on('message', (m: ParentToStationFeeder) => {
    if (m.type === 'count')
      send({
        type: 'counts',
        frames,
        loadsOn: rigs.reduce((s, r) => s + r.loadOn.filter(Boolean).length, 0),
        elapsedS: (performance.now() - t0) / 1000,
      });
    else {
      clearInterval(timer);
      for (const r of rigs) {
        r.out.close();
        r.input.close();
      }
      process.disconnect();
    }
  });
  send({ type: 'ready' });
}

main().catch((e: unknown) => {
  console.error(`bench station feeder: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
