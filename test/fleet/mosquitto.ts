/**
 * A real Mosquitto broker for the fleet tests, on a free loopback port, with its own
 * configuration, password file (made by mosquitto_passwd) and an ACL that gives each station
 * its own topics. Started and stopped by the tests; restartable on the same port.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { chmodSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export const MOSQUITTO = '/usr/sbin/mosquitto';
export const MOSQUITTO_PASSWD = '/usr/bin/mosquitto_passwd';

export interface BrokerAccount {
  username: string;
  password: string;
}

export interface TestBroker {
  url: string;
  port: number;
  dir: string;
  /** Writes an owner-only credentials file for this account and returns its path. */
  credentialsFile(account: BrokerAccount): string;
  kill(): Promise<void>;
  start(): Promise<void>;
  stop(): Promise<void>;
}

/** The ACL of docs/fleet.md: a station writes only under its own id, reads only its commands. */
export const FLEET_ACL = `user fleet
topic read cellvigil/v1/#
topic write cellvigil/v1/station/+/ch/+/command

pattern write cellvigil/v1/station/%u/#
pattern read cellvigil/v1/station/%u/ch/+/command
`;

export async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const a = s.address();
      const port = typeof a === 'object' && a ? a.port : 0;
      s.close(() => resolve(port));
    });
  });
}

async function waitListening(port: number, ms = 10_000): Promise<void> {
  const until = Date.now() + ms;
  for (;;) {
    const ok = await new Promise<boolean>((resolve) => {
      const c = connect(port, '127.0.0.1');
      c.once('connect', () => {
        c.destroy();
        resolve(true);
      });
      c.once('error', () => resolve(false));
    });
    if (ok) return;
    if (Date.now() > until) throw new Error(`mosquitto did not listen on ${port}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

export async function startBroker(accounts: BrokerAccount[]): Promise<TestBroker> {
  const dir = mkdtempSync(join(tmpdir(), 'cv-mosq-'));
  const port = await freePort();
  const passwd = join(dir, 'passwd');
  writeFileSync(passwd, '', { mode: 0o600 });
  for (const a of accounts) {
    const r = spawnSync(MOSQUITTO_PASSWD, ['-b', passwd, a.username, a.password]);
    if (r.status !== 0) throw new Error(`mosquitto_passwd failed: ${r.stderr.toString()}`);
  }
  writeFileSync(join(dir, 'acl'), FLEET_ACL, { mode: 0o600 });
  const conf = join(dir, 'mosquitto.conf');
  writeFileSync(
    conf,
    [
      `listener ${port} 127.0.0.1`,
      'allow_anonymous false',
      `password_file ${passwd}`,
      `acl_file ${join(dir, 'acl')}`,
      'persistence false',
      // Running as root, mosquitto would switch to its own user, who cannot read these files.
      ...(process.getuid?.() === 0 ? ['user root'] : []),
      'log_dest stderr',
      'log_type error',
      'log_type warning',
      '',
    ].join('\n'),
  );
  let child: ChildProcess | null = null;
  const broker: TestBroker = {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    dir,
    credentialsFile(a) {
      const p = join(dir, `${a.username}.json`);
      writeFileSync(p, JSON.stringify(a), { mode: 0o600 });
      chmodSync(p, 0o600);
      return p;
    },
    async start() {
      child = spawn(MOSQUITTO, ['-c', conf], { stdio: ['ignore', 'ignore', 'pipe'] });
      child.stderr?.on('data', (d: Buffer) => {
        const text = d.toString();
        if (!/should not be run as root/.test(text)) process.stderr.write(`mosquitto: ${text}`);
      });
      await waitListening(port);
    },
    async kill() {
      const c = child;
      child = null;
      if (!c || c.exitCode !== null) return;
      await new Promise<void>((resolve) => {
        c.once('exit', () => resolve());
        c.kill('SIGKILL');
      });
    },
    async stop() {
      await broker.kill();
      rmSync(dir, { recursive: true, force: true });
    },
  };
  await broker.start();
  return broker;
}
