import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { pino } from 'pino';
import { createApp } from '../../server/app';
import { createDb } from '../../server/db/client';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp } from '../helpers/api';
import { testConfig } from '../helpers/config';

let tdb: TestDb;
beforeAll(async () => {
  tdb = await createTestDb();
});
afterAll(async () => {
  await tdb.drop();
});

describe('GET /api/health', () => {
  it('reports ok with the database up', async () => {
    const { app } = buildTestApp(tdb);
    const res = await request(app).get('/api/health');
    expect(res.status).toBe(200);
    expect(res.body).toEqual({ status: 'ok', db: 'up' });
  });

  it('answers 503 with db down when PostgreSQL cannot be reached', async () => {
    // A port nothing listens on: the pool cannot connect.
    const dead = createDb('postgres://runnel:x@127.0.0.1:1/none', { max: 1 });
    const { app } = createApp({
      config: testConfig('postgres://runnel:x@127.0.0.1:1/none'),
      db: dead.db, pool: dead.pool, log: pino({ level: 'silent' }), sessionCookieName: 'runnel.sid', clientDir: '/nonexistent',
    });
    const res = await request(app).get('/api/health');
    expect(res.status).toBe(503);
    expect(res.body.db).toBe('down');
    await dead.close();
  });

  it('answers an unknown API route with the one error shape', async () => {
    const { app } = buildTestApp(tdb);
    const res = await request(app).get('/api/nothing-here');
    expect(res.status).toBe(404);
    expect(res.body.error.code).toBe('not_found');
    expect(typeof res.body.error.message).toBe('string');
  });
});
