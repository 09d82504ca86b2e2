import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { sessionCookie, startLiveWorld, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
const faults: unknown[] = [];
const onFault = (e: unknown) => faults.push(e);

beforeAll(async () => {
  w = await startLiveWorld();
  process.on('unhandledRejection', onFault);
  process.on('uncaughtException', onFault);
});
afterAll(async () => {
  process.off('unhandledRejection', onFault);
  process.off('uncaughtException', onFault);
  await w.close();
});

describe('stopping an instance', () => {
  it('lets requests already running finish before the database closes, and takes no new ones', async () => {
    const cookie = await sessionCookie(w.rt.url, w.f.users.manager.email);
    const paths = ['/api/sites', '/api/controllers', `/api/sites/${w.f.siteA}`, '/api/alerts', `/api/sites/${w.f.siteA}/programs`, '/api/auth/me'];
    const N = 36;
    // Wait until the server has every request in hand, then stop it while they run.
    let seen = 0;
    const allIn = new Promise<void>((ok) => w.rt.server.on('request', () => ++seen === N && ok()));
    const answers = Array.from({ length: N }, async (_, i) => {
      try {
        const r = await fetch(`${w.rt.url}${paths[i % paths.length]}`, { headers: { cookie } });
        return { status: r.status, body: await r.text() };
      } catch (e) {
        return { status: 0, body: (e as Error).message }; // cut off before the whole answer came
      }
    });
    await allIn;
    const closed = w.rt.close();
    const results = await Promise.all(answers);
    await closed;
    // Every request that had reached the server got its whole answer, and none failed on a closed pool.
    expect(results.map((r) => r.status)).toEqual(results.map(() => 200));
    expect(results.some((r) => /pool/i.test(r.body))).toBe(false);
    // A new request after the stop is refused at the door.
    const late = await fetch(`${w.rt.url}/api/health`).then((r) => r.status, () => 0);
    expect(late).toBe(0);
    expect(faults).toEqual([]);
  });
});
