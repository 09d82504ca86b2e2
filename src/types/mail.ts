/** What GET /api/mail/outbox returns (demo mode, admins): mail the local fake SMTP server caught. */
export type CaughtMailView = {
  id: number;
  receivedAt: string;
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

export type OutboxResponse = { smtpUrl: string; kept: number; items: CaughtMailView[] };
