import { chromium, type BrowserContext, type Page } from 'playwright-core';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';

export const SCREENSHOT_DIR = path.resolve('test-results/screenshots');

/** Debian's Chromium, headless, with its background networking off (the machine's network is closed). */
export async function launchBrowser(): Promise<{ context: BrowserContext; close: () => Promise<void> }> {
  // Before any test takes a picture, whichever way it takes it.
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'runnel-chromium-'));
  const context = await chromium.launchPersistentContext(dir, {
    executablePath: '/usr/bin/chromium',
    headless: true,
    args: [
      '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync',
    ],
  });
  return {
    context,
    close: async () => {
      await context.close();
      fs.rmSync(dir, { recursive: true, force: true });
    },
  };
}

/** Is this URL somewhere other than 127.0.0.1? (data: and blob: URLs go nowhere.) */
export function leaves127(url: string): boolean {
  const u = new URL(url);
  if (u.protocol === 'data:' || u.protocol === 'blob:') return false;
  return u.hostname !== '127.0.0.1';
}

/**
 * Record every request and every WebSocket a page opens whose host is not 127.0.0.1, into
 * `into` when given (say, one list per test), and return the list.
 */
export function watchForeignRequests(page: Page, into: string[] = []): string[] {
  page.on('request', (req) => {
    if (leaves127(req.url())) into.push(req.url());
  });
  page.on('websocket', (ws) => {
    if (leaves127(ws.url())) into.push(`websocket ${ws.url()}`);
  });
  return into;
}

/** A PNG in test-results/screenshots/ (the whole page unless `fullPage: false`). */
export async function screenshot(page: Page, name: string, opts: { fullPage?: boolean } = {}): Promise<string> {
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  const file = path.join(SCREENSHOT_DIR, `${name}.png`);
  await page.screenshot({ path: file, fullPage: opts.fullPage ?? true });
  return file;
}
