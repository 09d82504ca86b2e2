import nodemailer from 'nodemailer';
import type { Logger } from 'pino';

export type OutgoingMail = { to: string; subject: string; text: string; html: string };
export type SentMail = { messageId: string | null };

export interface Mailer {
  send(m: OutgoingMail): Promise<SentMail>;
  close(): void;
}

/** Mail over SMTP (SMTP_URL). `local` = the fake server on loopback: no TLS is tried. */
export function createSmtpMailer(opts: { url: string; from: string; local?: boolean; log: Logger }): Mailer {
  const transport = nodemailer.createTransport({
    url: opts.url,
    ...(opts.local ? { ignoreTLS: true } : {}),
    connectionTimeout: 10_000,
    greetingTimeout: 10_000,
    socketTimeout: 30_000,
  } as Parameters<typeof nodemailer.createTransport>[0]);
  return {
    async send(m) {
      const info = await transport.sendMail({ from: opts.from, to: m.to, subject: m.subject, text: m.text, html: m.html });
      opts.log.info({ to: m.to, subject: m.subject, messageId: info.messageId }, 'mail sent');
      return { messageId: info.messageId ?? null };
    },
    close: () => transport.close(),
  };
}

/** No mail server configured (production without SMTP_URL): log what would have gone out. */
export function createNullMailer(log: Logger): Mailer {
  return {
    async send(m) {
      log.warn({ to: m.to, subject: m.subject }, 'SMTP_URL is not set; mail not sent');
      return { messageId: null };
    },
    close: () => {},
  };
}
