import WebSocket from 'ws';
import { startRuntime, type Runtime } from '../../server/runtime';
import { provisionBoards, type BoardSpecRow } from '../../server/services/device-secrets';
import { createTestDb, type TestDb } from './db';
import { testConfig } from './config';
import { PASSWORD, seedFixture, type Fixture } from './fixtures';

export type LiveWorld = { rt: Runtime; tdb: TestDb; f: Fixture; boards: BoardSpecRow[]; close: () => Promise<void> };

/** The whole server (embedded broker, ingest, dispatcher, /ws) on random ports over the fixture world. */
export async function startLiveWorld(extra: Record<string, string> = {}): Promise<LiveWorld> {
  const tdb = await createTestDb();
  const f = await seedFixture(tdb.db);
  const boards = await provisionBoards(tdb.db);
  const rt = await startRuntime(
    testConfig(tdb.url, { ACK_TIMEOUT_MS: '800', COMMAND_RETRIES: '1', READING_FLUSH_MS: '50', FAILSAFE_MARGIN_SECONDS: '2', ...extra }),
  );
  return {
    rt, tdb, f, boards,
    close: async () => {
      await rt.close();
      await tdb.drop();
    },
  };
}

/** Sign in over HTTP and return the session cookie. */
export async function sessionCookie(baseUrl: string, email: string, password = PASSWORD): Promise<string> {
  const res = await fetch(`${baseUrl}/api/auth/sign-in`, {
    method: 'POST',
    headers: { 'content-type': 'application/json' },
    body: JSON.stringify({ email, password }),
  });
  if (res.status !== 200) throw new Error(`sign-in failed: ${res.status}`);
  return res.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
}

export type LiveClient = {
  ws: WebSocket;
  messages: { type: string; [k: string]: unknown }[];
  waitFor: (pred: (m: { type: string; [k: string]: unknown }) => boolean, ms?: number) => Promise<{ type: string; [k: string]: unknown }>;
  close: () => void;
};

export async function liveClient(baseUrl: string, cookie: string): Promise<LiveClient> {
  const ws = new WebSocket(`${baseUrl.replace(/^http/, 'ws')}/ws`, { headers: { cookie, origin: baseUrl } });
  const messages: LiveClient['messages'] = [];
  const waiters: { pred: (m: LiveClient['messages'][number]) => boolean; resolve: (m: LiveClient['messages'][number]) => void }[] = [];
  ws.on('message', (d) => {
    const m = JSON.parse(String(d));
    messages.push(m);
    for (const w of [...waiters]) if (w.pred(m)) {
      waiters.splice(waiters.indexOf(w), 1);
      w.resolve(m);
    }
  });
  await new Promise<void>((ok, fail) => {
    ws.once('open', () => ok());
    ws.once('error', fail);
    ws.once('unexpected-response', (_req, res) => fail(new Error(`ws refused: ${res.statusCode}`)));
  });
  return {
    ws,
    messages,
    waitFor: (pred, ms = 5000) =>
      new Promise((resolve, reject) => {
        const found = messages.find(pred);
        if (found) return resolve(found);
        const t = setTimeout(() => reject(new Error('timed out waiting for a live message')), ms);
        waiters.push({ pred, resolve: (m) => { clearTimeout(t); resolve(m); } });
      }),
    close: () => ws.close(),
  };
}

export async function until<T>(fn: () => T | Promise<T>, ms = 5000, step = 25): Promise<NonNullable<T>> {
  const end = Date.now() + ms;
  for (;;) {
    const v = await fn();
    if (v) return v as NonNullable<T>;
    if (Date.now() > end) throw new Error('condition not met in time');
    await new Promise((r) => setTimeout(r, step));
  }
}
