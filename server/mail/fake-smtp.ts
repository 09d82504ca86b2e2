import type { AddressInfo } from 'node:net';
import { SMTPServer } from 'smtp-server';
import { parseMail } from './mime';

export type CaughtMail = {
  id: number;
  receivedAt: string;
  /** Envelope sender and recipients, as the SMTP client gave them. */
  envelopeFrom: string | null;
  envelopeTo: string[];
  subject: string;
  from: string;
  to: string;
  messageId: string | null;
  text: string;
  html: string;
  size: number;
};

export type FakeSmtp = {
  url: string;
  port: number;
  messages: () => CaughtMail[];
  clear: () => void;
  /** Resolves with the first caught message (already caught or yet to come) that matches. */
  waitFor: (pred: (m: CaughtMail) => boolean, ms?: number) => Promise<CaughtMail>;
  close: () => Promise<void>;
};

/** Largest message kept; bigger ones are refused. */
const MAX_BYTES = 2 * 1024 * 1024;

/**
 * A local SMTP server that accepts every message on loopback and keeps the last `keep` of them in
 * memory. Runnel mails it in development, demo mode and the tests instead of a real mail server.
 */
export async function startFakeSmtp(opts: { host?: string; port?: number; keep?: number } = {}): Promise<FakeSmtp> {
  const keep = opts.keep ?? 200;
  const host = opts.host ?? '127.0.0.1';
  const caught: CaughtMail[] = [];
  const waiters: { pred: (m: CaughtMail) => boolean; resolve: (m: CaughtMail) => void }[] = [];
  let nextId = 1;
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ['STARTTLS', 'AUTH'],
    size: MAX_BYTES,
    logger: false,
    closeTimeout: 1000,
    banner: 'Runnel fake SMTP server: messages stay in memory and go nowhere',
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('end', () => {
        if ((stream as unknown as { sizeExceeded?: boolean }).sizeExceeded) return callback(new Error('Message too large'));
        const raw = Buffer.concat(chunks).toString('utf8');
        const p = parseMail(raw);
        const env = session.envelope;
        const m: CaughtMail = {
          id: nextId++,
          receivedAt: new Date().toISOString(),
          envelopeFrom: env.mailFrom ? env.mailFrom.address : null,
          envelopeTo: env.rcptTo.map((r) => r.address),
          subject: p.subject,
          from: p.from,
          to: p.to,
          messageId: p.headers['message-id'] ?? null,
          text: p.text,
          html: p.html,
          size: raw.length,
        };
        caught.push(m);
        if (caught.length > keep) caught.splice(0, caught.length - keep);
        for (const w of [...waiters]) if (w.pred(m)) {
          waiters.splice(waiters.indexOf(w), 1);
          w.resolve(m);
        }
        callback(null, `Kept as message ${m.id}`);
      });
    },
  });
  server.on('error', () => {});
  await new Promise<void>((ok, fail) => {
    server.server.once('error', fail);
    server.listen(opts.port ?? 0, host, () => ok());
  });
  const port = (server.server.address() as AddressInfo).port;
  return {
    url: `smtp://${host}:${port}`,
    port,
    messages: () => [...caught],
    clear: () => void caught.splice(0, caught.length),
    waitFor: (pred, ms = 5000) =>
      new Promise((resolve, reject) => {
        const found = caught.find(pred);
        if (found) return resolve(found);
        const t = setTimeout(() => {
          waiters.splice(waiters.findIndex((w) => w.resolve === done), 1);
          reject(new Error('timed out waiting for a mail'));
        }, ms);
        const done = (m: CaughtMail) => {
          clearTimeout(t);
          resolve(m);
        };
        waiters.push({ pred, resolve: done });
      }),
    close: () => new Promise<void>((ok) => server.close(() => ok())),
  };
}
