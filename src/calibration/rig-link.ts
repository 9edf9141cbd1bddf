/**
 * The host side of the rig protocol for a short interactive session (calibration): hello,
 * load on and off with acknowledgement, a heartbeat while the load is on, decoded data frames
 * to listeners, and waits on the injected clock. Any Source will do: a port or the simulator.
 */
import type { Clock, TimerHandle } from '../core/clock.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { decodeRigLine, encodeCommand } from '../protocol/codec.js';
import type { DataFrame, HelloFrame, RigMessage } from '../protocol/messages.js';
import type { Source } from '../sources/source.js';
import { missingChannel } from '../protocol/hello-check.js';

export interface RigLinkOptions {
  source: Source;
  clock: Clock;
  channel: number;
  adcBits: number;
  /** How long to wait for the rig's hello, ms. @default 3000 */
  helloTimeoutMs?: number;
  /** How long to wait for a command's acknowledgement, ms. @default 2000 */
  ackTimeoutMs?: number;
  /** Heartbeat period while the load is on, ms (the rig cuts the load after 5 s without). @default 500 */
  beatMs?: number;
}

export type FrameListener = (frame: DataFrame, atMs: number) => void;

interface Waiter {
  match: (m: RigMessage) => boolean;
  resolve: (m: RigMessage) => void;
  reject: (e: Error) => void;
}

export class RigLink {
  hello: HelloFrame | null = null;
  /** Lines that failed the codec (bad checksum, garbage): counted, never used. */
  rejected = 0;
  /** True from the moment LOAD 1 is sent until the rig acknowledges LOAD 0. */
  private loadMaybeOn = false;
  private everSwitchedOn = false;
  private readonly listeners = new Set<FrameListener>();
  private readonly waiters = new Set<Waiter>();
  private readonly aborts = new Set<(e: Error) => void>();
  private beat: TimerHandle | null = null;
  private closed: CellvigilError | null = null;
  private readonly o: Required<RigLinkOptions>;

  constructor(options: RigLinkOptions) {
    this.o = { helloTimeoutMs: 3000, ackTimeoutMs: 2000, beatMs: 500, ...options };
  }

  get loadOn(): boolean {
    return this.loadMaybeOn;
  }

  /** Opens the source, asks for a hello and checks it against the rig profile. */
  async open(signal?: AbortSignal): Promise<HelloFrame> {
    await this.o.source.open({
      line: (text) => this.onLine(text),
      overlong: () => {
        this.rejected++;
      },
      closed: (reason) => this.onClosed(reason),
    });
    const where = this.o.source.description;
    const got = this.waitFor(
      (m) => m.kind === 'hello',
      this.o.helloTimeoutMs,
      signal,
      () =>
        makeError(
          ErrorCodes.RIG_SILENT,
          `no hello from the rig within ${this.o.helloTimeoutMs / 1000} s`,
          where,
          'Check the port, the baud rate (frame.baud in the rig profile) and that the rig firmware speaks protocol v1.',
        ),
    );
    this.send({ command: 'HELLO' });
    const hello = (await got) as HelloFrame;
    this.hello = hello;
    if (hello.adcBits !== this.o.adcBits) {
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        `the rig reports a ${hello.adcBits}-bit ADC but the rig profile says ${this.o.adcBits} bits`,
        `${where}, adc.bits`,
        'Use the rig profile written for this board (--rig), or correct adc.bits in it.',
      );
    }
    const missing = missingChannel(this.o.channel, hello);
    if (missing) throw missing;
    return hello;
  }

  /** Calls `listener` with every data frame of any channel and its arrival time; returns an unsubscribe. */
  onFrame(listener: FrameListener): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  /** Waits `ms` on the link's clock; rejects when `signal` aborts or the link closes. */
  sleep(ms: number, signal?: AbortSignal): Promise<void> {
    return new Promise<void>((resolve, reject) => {
      if (this.closed) return reject(this.closed);
      if (signal?.aborted) return reject(signal.reason as Error);
      const done = (): void => {
        signal?.removeEventListener('abort', onAbort);
        this.aborts.delete(fail);
      };
      const handle = this.o.clock.setTimer(() => {
        done();
        resolve();
      }, ms);
      const fail = (e: Error): void => {
        this.o.clock.clearTimer(handle);
        done();
        reject(e);
      };
      const onAbort = (): void => fail(signal!.reason as Error);
      signal?.addEventListener('abort', onAbort, { once: true });
      this.aborts.add(fail);
    });
  }

  /**
   * Switches the channel's load and waits for the rig's acknowledgement. Switching on starts
   * the heartbeat first; switching off stops it whatever the outcome, so that a rig that did
   * not hear the off still cuts the load by its own watchdog. Retries an unacknowledged off once.
   */
  async setLoad(on: boolean, signal?: AbortSignal): Promise<void> {
    if (on) {
      this.loadMaybeOn = true;
      this.everSwitchedOn = true;
      if (!this.beat)
        this.beat = this.o.clock.setTimer(
          () => this.send({ command: 'BEAT' }),
          this.o.beatMs,
          true,
        );
      await this.command(true, signal);
      return;
    }
    try {
      try {
        await this.command(false);
      } catch (e) {
        if (this.closed) throw e;
        await this.command(false);
      }
      this.loadMaybeOn = false;
    } finally {
      if (this.beat) this.o.clock.clearTimer(this.beat);
      this.beat = null;
    }
  }

  /**
   * Switches the load off if it was ever switched on (and not confirmed off), then closes the
   * source. Never throws: returns whether the off was confirmed (null when the load was never on).
   */
  async close(): Promise<{ offConfirmed: boolean | null; error: Error | null }> {
    let offConfirmed: boolean | null = null;
    let error: Error | null = null;
    if (this.everSwitchedOn) {
      offConfirmed = !this.loadMaybeOn;
      if (this.loadMaybeOn) {
        try {
          await this.setLoad(false);
          offConfirmed = true;
        } catch (e) {
          error = e as Error;
          offConfirmed = false;
        }
      }
    }
    if (this.beat) this.o.clock.clearTimer(this.beat);
    this.beat = null;
    this.listeners.clear();
    await this.o.source.close();
    return { offConfirmed, error };
  }

  private async command(on: boolean, signal?: AbortSignal): Promise<void> {
    const ch = this.o.channel;
    const state = on ? '1' : '0';
    const where = `${this.o.source.description}, LOAD ${ch} ${state}`;
    const ack = this.waitFor(
      (m) =>
        (m.kind === 'ack' &&
          m.command === 'LOAD' &&
          m.args[0] === String(ch) &&
          m.args[1] === state) ||
        m.kind === 'rig-error',
      this.o.ackTimeoutMs,
      signal,
      () =>
        makeError(
          ErrorCodes.LOAD_NOT_CONFIRMED,
          `the rig did not confirm switching the load ${on ? 'on' : 'off'} within ${this.o.ackTimeoutMs / 1000} s`,
          where,
          on
            ? 'Check the link; the load is being switched off.'
            : 'Check the rig now: without heartbeats its watchdog cuts the load within 5 s; disconnect the cell if in doubt.',
        ),
    );
    if (!this.send({ command: 'LOAD', channel: ch, on })) {
      ack.catch(() => undefined);
      throw makeError(
        ErrorCodes.LOAD_NOT_CONFIRMED,
        'the command could not be sent: the link is closed',
        where,
        'Check the connection to the rig.',
      );
    }
    const reply = await ack;
    if (reply.kind === 'rig-error') {
      throw makeError(
        ErrorCodes.LOAD_NOT_CONFIRMED,
        `the rig refused the command: ${reply.code} ${reply.text}`,
        where,
        'Check --channel and the rig firmware.',
      );
    }
  }

  private send(cmd: Parameters<typeof encodeCommand>[0]): boolean {
    if (this.closed) return false;
    return this.o.source.write(encodeCommand(cmd));
  }

  private waitFor(
    match: Waiter['match'],
    timeoutMs: number,
    signal: AbortSignal | undefined,
    timeout: () => Error,
  ): Promise<RigMessage> {
    return new Promise<RigMessage>((resolve, reject) => {
      if (this.closed) return reject(this.closed);
      if (signal?.aborted) return reject(signal.reason as Error);
      const finish = (): void => {
        this.o.clock.clearTimer(handle);
        this.waiters.delete(w);
        this.aborts.delete(fail);
        signal?.removeEventListener('abort', onAbort);
      };
      const fail = (e: Error): void => {
        finish();
        reject(e);
      };
      const w: Waiter = {
        match,
        resolve: (m) => {
          finish();
          resolve(m);
        },
        reject: fail,
      };
      const handle = this.o.clock.setTimer(() => fail(timeout()), timeoutMs);
      const onAbort = (): void => fail(signal!.reason as Error);
      signal?.addEventListener('abort', onAbort, { once: true });
      this.waiters.add(w);
      this.aborts.add(fail);
    });
  }

  private onLine(text: string): void {
    const d = decodeRigLine(text, this.o.adcBits);
    if (!d.ok) {
      this.rejected++;
      return;
    }
    const m = d.message;
    if (m.kind === 'data') {
      const at = this.o.clock.now();
      for (const l of [...this.listeners]) l(m, at);
      return;
    }
    for (const w of [...this.waiters]) if (w.match(m)) w.resolve(m);
  }

  private onClosed(reason: string): void {
    if (this.closed) return;
    this.closed = makeError(
      ErrorCodes.RIG_SILENT,
      `the link to the rig closed: ${reason}`,
      this.o.source.description,
      'Check the cable and the port; the rig cuts its load by itself after 5 s without heartbeats.',
    );
    for (const fail of [...this.aborts]) fail(this.closed);
  }
}
