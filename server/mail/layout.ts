/** The frame every Runnel mail shares: the firm's name, the content, a link back. Text and HTML. */
export type MailContent = {
  /** Short lines or paragraphs, in order. */
  intro: string;
  sections: { heading: string; lines: string[] }[];
  link: { label: string; url: string };
  footer: string;
};

export function escapeHtml(s: string): string {
  return s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&#39;');
}

export function renderMail(firmName: string, c: MailContent): { text: string; html: string } {
  const text = [
    firmName,
    '',
    c.intro,
    '',
    ...c.sections.flatMap((s) => [s.heading, ...s.lines.map((l) => `  - ${l}`), '']),
    `${c.link.label}: ${c.link.url}`,
    '',
    '--',
    c.footer,
  ].join('\n');
  const e = escapeHtml;
  const html = `<!doctype html>
<html><body style="font-family: sans-serif; color: #1f2a30; line-height: 1.45">
<p style="font-size: 18px; font-weight: 600; margin: 0 0 12px">${e(firmName)}</p>
<p>${e(c.intro)}</p>
${c.sections.map((s) => `<h3 style="margin: 16px 0 4px">${e(s.heading)}</h3>\n<ul>${s.lines.map((l) => `<li>${e(l)}</li>`).join('')}</ul>`).join('\n')}
<p><a href="${e(c.link.url)}">${e(c.link.label)}</a></p>
<p style="color: #66737a; font-size: 12px">${e(c.footer)}</p>
</body></html>`;
  return { text, html };
}
