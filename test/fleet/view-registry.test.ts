/**
 * One registry for several benches: a fleet view given a registry files every result it sees
 * on the broker (a real Mosquitto on loopback), once per run however often it is seen.
 * Retained messages reaching every later subscriber is OASIS MQTT Version 5.0 §3.3.1.3 (from
 * memory): a fleet view started again sees each result again and must not file it twice.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveBroker } from '../../src/fleet/broker-options.js';
import { fileFleetResult, registryFiler } from '../../src/fleet/fleet-filing.js';
import { startFleetLink, type FleetLink } from '../../src/fleet/fleet-link.js';
import { startFleetView, type FleetView } from '../../src/fleet/fleet-view.js';
import { Registry } from '../../src/registry/registry-db.js';
import { fixtureResult } from '../registry/run-fixtures.js';
import { CONTROL_TOKEN, handFedHub, until } from './helpers.js';
import { startBroker, type TestBroker } from './mosquitto.js';

const ACCOUNTS = [
  { username: 'bench-a', password: 'pa-ss-a' },
  { username: 'bench-b', password: 'pa-ss-b' },
  { username: 'fleet', password: 'fl-ee-t' },
];
const TOKENS = { control: 'c'.repeat(64), viewer: 'v'.repeat(64) };
const dir = mkdtempSync(join(tmpdir(), 'cv-fleet-registry-'));
const registryPath = join(dir, 'lab.sqlite');
let broker: TestBroker;
const links: FleetLink[] = [];
const lines: string[] = [];

const creds = (name: string) => broker.credentialsFile(ACCOUNTS.find((x) => x.username === name)!);

async function view(n: number): Promise<{ v: FleetView; filer: ReturnType<typeof registryFiler> }> {
  const filer = registryFiler(registryPath, (l) => lines.push(l));
  const v = await startFleetView({
    broker: resolveBroker({ url: broker.url, credentialsFile: creds('fleet') }, `fleet-${n}`),
    listen: '127.0.0.1:0',
    tokenStore: TOKENS,
    fileResult: filer,
  });
  return { v, filer };
}

function runsIn(): { runs: number; a: number; b: number } {
  const r = Registry.open(registryPath);
  try {
    return { runs: r.counts().runs, a: r.runsOf('A-1').length, b: r.runsOf('B-1').length };
  } finally {
    r.close();
  }
}

beforeAll(async () => {
  broker = await startBroker(ACCOUNTS);
});

afterAll(async () => {
  await Promise.all(links.map((l) => l.close(500)));
  await broker?.stop();
  rmSync(dir, { recursive: true, force: true });
});

describe('a fleet view with a registry', () => {
  it('files the results of two stations into one registry, each run once', async () => {
    const benches = (['bench-a', 'bench-b'] as const).map((station, i) => {
      const fed = handFedHub(`cell-${i}`);
      links.push(
        startFleetLink({
          broker: resolveBroker({ url: broker.url, credentialsFile: creds(station) }, station),
          station,
          channels: [{ channel: i, hub: fed.hub }],
          controlToken: CONTROL_TOKEN,
        }),
      );
      return fed.hub;
    });
    const first = await view(1);
    benches[0]!.result(
      fixtureResult({ cell_id: 'A-1', started: '2026-12-01T08:00:00.000Z', capacity_Ah: 2.41 }),
    );
    benches[1]!.result(
      fixtureResult({ cell_id: 'B-1', started: '2026-12-01T09:00:00.000Z', capacity_Ah: 2.37 }),
    );
    await until('both filed', () => lines.filter((l) => l.includes('filed in')).length === 2);
    await first.filer.idle();
    expect(runsIn()).toEqual({ runs: 2, a: 1, b: 1 });
    const a = Registry.open(registryPath);
    expect(a.runsOf('A-1')[0]).toMatchObject({ capacity_Ah: 2.41, folder: expect.any(String) });
    a.close();
    await first.v.close();

    // Started again, the view gets both retained results once more: still one row per run.
    const second = await view(2);
    await until('seen again', () => lines.filter((l) => l.includes('filed in')).length === 4);
    await second.filer.idle();
    expect(runsIn()).toEqual({ runs: 2, a: 1, b: 1 });
    await second.v.close();
  }, 30_000);

  it('skips a result without a cell id and refuses a damaged one, saying which', async () => {
    const base = { v: 1 as const, station: 'bench-a', channel: 0, wall: '2026-12-01T10:00:00Z' };
    const plain = fixtureResult({ started: '2026-12-01T10:00:00.000Z', capacity_Ah: 2 });
    expect(
      await fileFleetResult(registryPath, { ...base, run_id: 'r-plain', result: plain }),
    ).toMatchObject({ status: 'skipped', reason: expect.stringMatching(/r-plain .*no cell id/) });
    const damaged = { ...plain, cell_id: 'A-2', capacity_Ah: 'lots' };
    expect(
      await fileFleetResult(registryPath, { ...base, run_id: 'r-bad', result: damaged }),
    ).toMatchObject({ status: 'failed', code: 'CV_RUN_DATA' });
    expect(runsIn().runs).toBe(2);
  });
});
