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

/** No mail server configured (production without SMTP_URL): nothing is sent, and nothing is logged as sent. */
export function createNullMailer(): Mailer {
  return {
    async send() {
      throw new Error('SMTP_URL is not set; mail is not sent');
    },
    close: () => {},
  };
}
