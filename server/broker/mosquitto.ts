import { pbkdf2Sync, randomBytes } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { projectRoot } from '../paths';

/**
 * Runnel with an external Mosquitto broker: Mosquitto checks board credentials and topic ACLs
 * itself, from files Runnel generates. Passwords use Mosquitto 2's own format, `$7$` =
 * PBKDF2-SHA512, 101 iterations, 12-byte salt (what mosquitto_passwd writes). The secrets are
 * 24 random bytes, so the low iteration count does not make them guessable.
 */
export function mosquittoHash(secret: string, salt = randomBytes(12)): string {
  const hash = pbkdf2Sync(secret, salt, 101, 64, 'sha512');
  return `$7$101$${salt.toString('base64')}$${hash.toString('base64')}`;
}

export function verifyMosquittoHash(secret: string, stored: string): boolean {
  const [, seven, it, salt, hash] = stored.split('$');
  if (seven !== '7') return false;
  return pbkdf2Sync(secret, Buffer.from(salt, 'base64'), Number(it), 64, 'sha512').toString('base64') === hash;
}

export const SERVER_MQTT_USER = 'runnel-server';

export const MOSQUITTO_TEMPLATE_DIR = path.join(projectRoot, 'deploy/mosquitto');

/**
 * Write passwords, ACL and config into `dir`; returns the config file's path. Boards sign in on
 * `port`, the server instances (user SERVER_MQTT_USER, whose entry goes to a password file of its
 * own) on `serverPort`.
 */
export function writeMosquittoFiles(dir: string, port: number, entries: { user: string; hash: string }[], serverPort: number): string {
  fs.mkdirSync(path.join(dir, 'data'), { recursive: true });
  const line = (e: { user: string; hash: string }) => `${e.user}:${e.hash}`;
  fs.writeFileSync(path.join(dir, 'passwords'), entries.filter((e) => e.user !== SERVER_MQTT_USER).map(line).join('\n') + '\n', { mode: 0o640 });
  fs.writeFileSync(path.join(dir, 'server-passwords'), entries.filter((e) => e.user === SERVER_MQTT_USER).map(line).join('\n') + '\n', { mode: 0o640 });
  fs.copyFileSync(path.join(MOSQUITTO_TEMPLATE_DIR, 'runnel.acl'), path.join(dir, 'runnel.acl'));
  const conf = fs
    .readFileSync(path.join(MOSQUITTO_TEMPLATE_DIR, 'runnel.conf.template'), 'utf8')
    .replaceAll('{{DIR}}', dir)
    .replaceAll('{{SERVER_PORT}}', String(serverPort))
    .replaceAll('{{PORT}}', String(port));
  const file = path.join(dir, 'runnel.conf');
  fs.writeFileSync(file, conf);
  return file;
}
