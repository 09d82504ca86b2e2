/**
 * Just enough MIME to read back what nodemailer sends (the fake SMTP server and the tests):
 * headers with encoded words, multipart bodies, quoted-printable and base64 parts in UTF-8.
 * Not a general mail parser.
 */
export type ParsedMail = {
  headers: Record<string, string>;
  subject: string;
  from: string;
  to: string;
  text: string;
  html: string;
};

function splitHead(raw: string): { head: string; body: string } {
  const i = raw.search(/\r?\n\r?\n/);
  if (i < 0) return { head: raw, body: '' };
  const m = /\r?\n\r?\n/.exec(raw.slice(i))!;
  return { head: raw.slice(0, i), body: raw.slice(i + m[0].length) };
}

function parseHeaders(head: string): Record<string, string> {
  const out: Record<string, string> = {};
  const unfolded = head.replace(/\r?\n[ \t]+/g, ' ');
  for (const line of unfolded.split(/\r?\n/)) {
    const i = line.indexOf(':');
    if (i <= 0) continue;
    const k = line.slice(0, i).trim().toLowerCase();
    const v = decodeWords(line.slice(i + 1).trim());
    out[k] = out[k] ? `${out[k]}, ${v}` : v;
  }
  return out;
}

function qpBytes(s: string): Buffer {
  const clean = s.replace(/=\r?\n/g, '');
  const bytes: number[] = [];
  for (let i = 0; i < clean.length; i++) {
    const c = clean[i];
    if (c === '=' && /^[0-9A-Fa-f]{2}$/.test(clean.slice(i + 1, i + 3))) {
      bytes.push(parseInt(clean.slice(i + 1, i + 3), 16));
      i += 2;
    } else bytes.push(...Buffer.from(c, 'utf8'));
  }
  return Buffer.from(bytes);
}

/** RFC 2047 encoded words, =?UTF-8?Q?…?= and =?UTF-8?B?…?=. */
export function decodeWords(v: string): string {
  return v
    .replace(/\?=\s+=\?/g, '?==?')
    .replace(/=\?([^?]+)\?([QqBb])\?([^?]*)\?=/g, (_m, _cs, enc: string, text: string) =>
      enc.toUpperCase() === 'B' ? Buffer.from(text, 'base64').toString('utf8') : qpBytes(text.replace(/_/g, ' ')).toString('utf8'),
    );
}

function param(value: string, name: string): string | null {
  const m = new RegExp(`${name}\\s*=\\s*(?:"([^"]*)"|([^;\\s]+))`, 'i').exec(value);
  return m ? (m[1] ?? m[2]) : null;
}

function decodeBody(body: string, encoding: string | undefined): string {
  const e = (encoding ?? '7bit').toLowerCase();
  if (e === 'base64') return Buffer.from(body.replace(/\s+/g, ''), 'base64').toString('utf8');
  if (e === 'quoted-printable') return qpBytes(body).toString('utf8');
  return body;
}

function walk(raw: string, out: { text: string; html: string }) {
  const { head, body } = splitHead(raw);
  const h = parseHeaders(head);
  const type = (h['content-type'] ?? 'text/plain').toLowerCase();
  if (type.startsWith('multipart/')) {
    const boundary = param(h['content-type'], 'boundary');
    if (!boundary) return;
    const parts = body.split(new RegExp(`\\r?\\n?--${boundary.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}(?:--)?[ \\t]*\\r?\\n?`));
    for (const p of parts.slice(1)) if (p.trim()) walk(p, out);
    return;
  }
  const text = decodeBody(body, h['content-transfer-encoding']);
  if (type.startsWith('text/html')) out.html += text;
  else if (type.startsWith('text/plain')) out.text += text;
}

export function parseMail(raw: string): ParsedMail {
  const { head } = splitHead(raw);
  const headers = parseHeaders(head);
  const out = { text: '', html: '' };
  walk(raw, out);
  return { headers, subject: headers.subject ?? '', from: headers.from ?? '', to: headers.to ?? '', text: out.text, html: out.html };
}
