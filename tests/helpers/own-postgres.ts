import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { freePort } from './ports';

/**
 * A PostgreSQL cluster of one test's own, so the test can stop and start it without touching
 * the shared test cluster. Runs as the postgres system user (PostgreSQL refuses root), trusts
 * loopback connections (it lives for one test, on a random port, in a temporary folder).
 */
export type OwnPostgres = { url: string; stop: () => void; start: () => void; destroy: () => void };

function binDir(): string {
  const base = '/usr/lib/postgresql';
  const v = fs.readdirSync(base).sort((a, b) => Number(b) - Number(a))[0];
  return path.join(base, v, 'bin');
}


const asPostgres = (cmd: string, args: string[]) =>
  process.getuid?.() === 0 ? execFileSync('runuser', ['-u', 'postgres', '--', cmd, ...args], { stdio: 'pipe' }) : execFileSync(cmd, args, { stdio: 'pipe' });

export async function startOwnPostgres(): Promise<OwnPostgres> {
  const bin = binDir();
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'runnel-pg-'));
  fs.chmodSync(dir, 0o755);
  const data = path.join(dir, 'data');
  fs.mkdirSync(data);
  if (process.getuid?.() === 0) execFileSync('chown', ['-R', 'postgres:postgres', dir]);
  const port = await freePort();
  asPostgres(path.join(bin, 'initdb'), ['-D', data, '-U', 'runnel', '--auth=trust', '-E', 'UTF8', '--locale=C.UTF-8']);
  fs.appendFileSync(path.join(data, 'postgresql.conf'), `\nlisten_addresses = '127.0.0.1'\nport = ${port}\nunix_socket_directories = '${data}'\nfsync = off\n`);
  const start = () => asPostgres(path.join(bin, 'pg_ctl'), ['-D', data, '-l', path.join(dir, 'log'), '-w', '-t', '30', 'start']);
  const stop = () => asPostgres(path.join(bin, 'pg_ctl'), ['-D', data, '-m', 'fast', '-w', 'stop']);
  start();
  return {
    url: `postgres://runnel@127.0.0.1:${port}`,
    start,
    stop,
    destroy: () => {
      try {
        stop();
      } catch {
        /* already stopped */
      }
      fs.rmSync(dir, { recursive: true, force: true });
    },
  };
}
