import { chromium, type BrowserContext, type Page } from 'playwright-core';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';

export const SCREENSHOT_DIR = path.resolve('test-results/screenshots');

/** Debian's Chromium, headless, with its background networking off (the machine's network is closed). */
export async function launchBrowser(): Promise<{ context: BrowserContext; close: () => Promise<void> }> {
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

/** Record every request a page makes whose host is not 127.0.0.1. */
export function watchForeignRequests(page: Page): string[] {
  const foreign: string[] = [];
  page.on('request', (req) => {
    const u = new URL(req.url());
    if (u.protocol === 'data:' || u.protocol === 'blob:') return;
    if (u.hostname !== '127.0.0.1') foreign.push(req.url());
  });
  return foreign;
}

export async function screenshot(page: Page, name: string): Promise<string> {
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  const file = path.join(SCREENSHOT_DIR, `${name}.png`);
  await page.screenshot({ path: file, fullPage: true });
  return file;
}
