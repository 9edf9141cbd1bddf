/**
 * The rig end of the ingest benchmark, in its own process (forked by bench-ingest): writes
 * protocol v1 frames into a pseudo-terminal as fast as the link takes them, answers the host's
 * LOAD commands like a rig, and optionally watches the live feed as one WebSocket viewer.
 *
 *   --port <pty>   --mode rig|blind   --rest <frames>   --flood <frames>   [--viewer <ws url>]
 *
 * `rig`: rest frames (load off) at 20 a second, then waits for `C,LOAD,0,1`, acknowledges it
 * and floods load-on frames. `blind` (the bare reader's run): floods at once.
 *
 * The pty is written and read through two serialport handles: one handle that both reads and
 * writes can miss its "writable" wake-up when data arrives meanwhile, which stalls the writer
 * until the next incoming line (seen here as 0.5 s pauses, one per host heartbeat). A rig's
 * firmware has no such stall; the feeder must not either.
 */
import { SerialPort } from 'serialport';
import { WebSocket } from 'ws';
import {
  argValue,
  BENCH_CELL,
  benchChain,
  FrameMaker,
  product,
  sleep,
  type CodecModule,
} from './bench-kit.js';

export type FeederToParent =
  | { type: 'ready' }
  | { type: 'flooded'; bytes: number }
  | { type: 'viewer'; messages: number; samples: number };
export type ParentToFeeder = { type: 'go' } | { type: 'finish' };

const send = (m: FeederToParent): void => {
  process.send!(m);
};

async function main(): Promise<void> {
  const path = argValue('port')!;
  const mode = argValue('mode') ?? 'blind';
  const restFrames = Number(argValue('rest') ?? 30);
  const floodFrames = Number(argValue('flood') ?? 100_000);
  const viewerUrl = argValue('viewer');
  const codec = await product<CodecModule>('protocol/codec.js');
  const frames = new FrameMaker(await benchChain(), codec.encodeDataFrame);
  const { restV, loadedV, loadA, celsius } = BENCH_CELL;

  // The whole flood is made before anything is sent, so the writer is never the slow side.
  const rest = Array.from({ length: restFrames }, () => frames.line(restV, 0, celsius, false));
  const flood = Buffer.from(
    Array.from({ length: floodFrames }, () => frames.line(loadedV, loadA, celsius, true)).join(''),
    'latin1',
  );

  const open = (): Promise<SerialPort> =>
    new Promise((resolve, reject) => {
      const p = new SerialPort({ path, baudRate: 115200, autoOpen: false, lock: false });
      p.open((e) => (e ? reject(e) : resolve(p)));
    });
  const out = await open();
  const input = await open();
  const commands: string[] = [];
  let partial = '';
  input.on('data', (chunk: Buffer) => {
    const parts = (partial + chunk.toString('latin1')).split('\n');
    partial = parts.pop() ?? '';
    for (const p of parts) {
      const cmd = codec.decodeHostLine(p.replace(/\r$/, ''));
      if ('error' in cmd || cmd.command !== 'LOAD') continue;
      commands.push(`${cmd.channel},${cmd.on ? 1 : 0}`);
      out.write(codec.frameLine(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`));
    }
  });

  let messages = 0;
  let samples = 0;
  let ws: WebSocket | null = null;
  if (viewerUrl) {
    ws = new WebSocket(viewerUrl);
    ws.on('message', (d) => {
      messages++;
      if ((JSON.parse(d.toString()) as { type: string }).type === 'sample') samples++;
    });
    await new Promise<void>((resolve, reject) => {
      ws!.once('open', () => resolve());
      ws!.once('error', reject);
    });
  }

  const go = new Promise<void>((resolve) =>
    process.on('message', (m: ParentToFeeder) => m.type === 'go' && resolve()),
  );
  const finish = new Promise<void>((resolve) =>
    process.on('message', (m: ParentToFeeder) => m.type === 'finish' && resolve()),
  );
  send({ type: 'ready' });
  await go;

  if (mode === 'rig') {
    for (const line of rest) {
      out.write(line);
      await sleep(50);
    }
    while (!commands.includes('0,1')) await sleep(5);
  }
  for (let at = 0; at < flood.length; at += 65536) {
    if (!out.write(flood.subarray(at, at + 65536)))
      await new Promise<void>((r) => out.once('drain', () => r()));
  }
  await new Promise<void>((resolve) => out.drain(() => resolve()));
  send({ type: 'flooded', bytes: flood.length });

  await finish;
  // Load off after the host's stop, so the session can confirm it.
  if (mode === 'rig') for (let k = 0; k < 3; k++) out.write(frames.line(restV, 0, celsius, false));
  await sleep(300);
  send({ type: 'viewer', messages, samples });
  ws?.close();
  await Promise.all(
    [out, input].map((p) => new Promise<void>((resolve) => p.close(() => resolve()))),
  );
  process.disconnect();
}

main().catch((e: unknown) => {
  console.error(`bench feeder: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
