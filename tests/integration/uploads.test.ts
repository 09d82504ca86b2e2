import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import zlib from 'node:zlib';
import { sql } from 'drizzle-orm';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let uploadDir: string;
let tech: Awaited<ReturnType<typeof signedIn>>;

// --- small real images, made here so the test needs no files ---

const crc32 = (zlib as unknown as { crc32: (b: Buffer) => number }).crc32;
function png(w: number, h: number): Buffer {
  const chunk = (type: string, data: Buffer) => {
    const len = Buffer.alloc(4);
    len.writeUInt32BE(data.length);
    const body = Buffer.concat([Buffer.from(type, 'latin1'), data]);
    const crc = Buffer.alloc(4);
    crc.writeUInt32BE(crc32(body) >>> 0);
    return Buffer.concat([len, body, crc]);
  };
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(w, 0);
  ihdr.writeUInt32BE(h, 4);
  ihdr[8] = 8; // bit depth
  ihdr[9] = 2; // RGB
  const raw = Buffer.alloc((w * 3 + 1) * h, 0x7f);
  for (let y = 0; y < h; y++) raw[y * (w * 3 + 1)] = 0; // filter: none
  return Buffer.concat([Buffer.from([137, 80, 78, 71, 13, 10, 26, 10]), chunk('IHDR', ihdr), chunk('IDAT', zlib.deflateSync(raw)), chunk('IEND', Buffer.alloc(0))]);
}
const hex = (s: string) => Buffer.from(s.replace(/\s+/g, ''), 'hex');
/** A JPEG's markers (SOI, JFIF, tables, frame 4 × 3, EOI): what the checks look at. */
const jpeg = () => Buffer.concat([hex('FFD8 FFE0 0010 4A464946 00 0101 00 0001 0001 0000 FFDB 0043 00'), Buffer.alloc(64, 1), hex('FFC0 0011 08 0003 0004 03 012200 021101 031101 FFD9')]);
/** A 1 × 1 lossless WebP. */
const webp = () => Buffer.from('UklGRhoAAABXRUJQVlA4TA0AAAAvAAAAEAcQERGIiP4HAA==', 'base64');

const storedFiles = () => ['plans', 'photos'].flatMap((k) => (fs.existsSync(path.join(uploadDir, k)) ? fs.readdirSync(path.join(uploadDir, k)).map((n) => `${k}/${n}`) : []));
const count = async (table: string) => (await tdb.db.execute(sql.raw(`select count(*)::int as n from ${table}`))).rows[0].n as number;

beforeAll(async () => {
  uploadDir = fs.mkdtempSync(path.join(os.tmpdir(), 'runnel-uploads-'));
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb, { UPLOAD_DIR: uploadDir }).app;
  tech = await signedIn(app, f.users.technician.email);
});
afterAll(async () => {
  await tdb.drop();
  fs.rmSync(uploadDir, { recursive: true, force: true });
});

describe('site plans', () => {
  it('refuses what is not a PNG, JPEG or WebP image — renamed, oversize, broken — and stores nothing', async () => {
    const refusals: [string, Buffer, string, string, RegExp][] = [
      ['a text file renamed .png', Buffer.from('just some notes about the site\n'), 'plan.png', 'not_an_image', /not a PNG, JPEG or WebP/],
      ['a PDF renamed .jpg', Buffer.concat([Buffer.from('%PDF-1.7\n'), Buffer.alloc(400, 0x20)]), 'plan.jpg', 'not_an_image', /application\/pdf/],
      ['a GIF', Buffer.concat([Buffer.from('GIF89a'), hex('0100 0100 0000 00'), Buffer.alloc(40)]), 'plan.gif', 'not_an_image', /not a PNG/],
      ['a PNG cut short', png(40, 30).subarray(0, 60), 'plan.png', 'broken_image', /damaged or cut short/],
      ['a PNG over 10 MB', Buffer.concat([png(2, 2), Buffer.alloc(10 * 1024 * 1024)]), 'big.png', 'file_too_large', /larger than 10 MB/],
      ['an empty file', Buffer.alloc(0), 'plan.png', 'file_empty', /empty/],
    ];
    for (const [what, bytes, name, code, message] of refusals) {
      const res = await tech.post(`/api/sites/${f.siteA}/plan`).attach('file', bytes, { filename: name, contentType: 'image/png' });
      expect(res.status, what).toBe(400);
      expect(res.body.error.code, what).toBe(code);
      expect(res.body.error.message, what).toMatch(message);
    }
    expect(await count('site_plans')).toBe(0);
    expect(storedFiles()).toEqual([]);
    const missing = await tech.post(`/api/sites/${f.siteA}/plan`).field('note', 'no file');
    expect(missing.body.error.code).toBe('file_missing');
  });

  it('accepts a PNG, serves it back with its type and nosniff, and replaces it with a JPEG', async () => {
    const up = await tech.post(`/api/sites/${f.siteA}/plan`).attach('file', png(40, 30), { filename: 'whatever.bin', contentType: 'application/octet-stream' });
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    expect(up.body).toMatchObject({ siteId: f.siteA, contentType: 'image/png', width: 40, height: 30, url: `/api/sites/${f.siteA}/plan` });
    const got = await tech.get(`/api/sites/${f.siteA}/plan`).buffer(true).parse((res, cb) => {
      const chunks: Buffer[] = [];
      res.on('data', (c: Buffer) => chunks.push(c));
      res.on('end', () => cb(null, Buffer.concat(chunks)));
    });
    expect(got.status).toBe(200);
    expect(got.headers['content-type']).toBe('image/png');
    expect(got.headers['x-content-type-options']).toBe('nosniff');
    expect(got.headers['content-security-policy']).toMatch(/default-src 'none'/);
    expect(Buffer.compare(got.body as Buffer, png(40, 30))).toBe(0);

    const again = await tech.post(`/api/sites/${f.siteA}/plan`).attach('file', jpeg(), 'plan.jpeg');
    expect(again.status).toBe(201);
    expect(again.body).toMatchObject({ contentType: 'image/jpeg', width: 4, height: 3 });
    expect(storedFiles().filter((n) => n.startsWith('plans/'))).toHaveLength(1); // the old file is gone
    const w = await tech.post(`/api/sites/${f.siteA}/plan`).attach('file', webp(), 'plan.webp');
    expect(w.body).toMatchObject({ contentType: 'image/webp', width: 1, height: 1 });
  });

  it('stores markers per zone as fractions of the image, and checks them', async () => {
    const put = await tech.put(`/api/sites/${f.siteA}/plan/markers`).send({ markers: [{ zoneId: f.zoneA, x: 0.25, y: 0.75 }] });
    expect(put.status, JSON.stringify(put.body)).toBe(200);
    expect(put.body.markers).toEqual([{ zoneId: f.zoneA, x: 0.25, y: 0.75 }]);
    const got = await tech.get(`/api/sites/${f.siteA}/plan/markers`);
    expect(got.body.plan).toMatchObject({ contentType: 'image/webp' });
    expect(got.body.markers).toEqual([{ zoneId: f.zoneA, x: 0.25, y: 0.75 }]);
    const out = await tech.put(`/api/sites/${f.siteA}/plan/markers`).send({ markers: [{ zoneId: f.zoneA, x: 1.5, y: 0 }] });
    expect(out.status).toBe(400);
    expect(out.body.error.details[0].path).toBe('markers.0.x');
    const admin = await signedIn(app, f.users.admin.email);
    const other = await admin.put(`/api/sites/${f.siteA}/plan/markers`).send({ markers: [{ zoneId: f.zoneB, x: 0.1, y: 0.1 }] });
    expect(other.status).toBe(400);
    expect(other.body.error.details[0].message).toMatch(/not at this site/);
    const noPlan = await admin.put(`/api/sites/${f.siteB}/plan/markers`).send({ markers: [] });
    expect(noPlan.status).toBe(409);
  });

  it('keeps plans to the people who may see and change the site', async () => {
    const owner = await signedIn(app, f.users.owner.email);
    expect((await owner.get(`/api/sites/${f.siteA}/plan`)).status).toBe(200);
    expect((await owner.post(`/api/sites/${f.siteA}/plan`).attach('file', png(2, 2), 'p.png')).status).toBe(403);
    expect((await tech.post(`/api/sites/${f.siteB}/plan`).attach('file', png(2, 2), 'p.png')).status).toBe(404);
    expect((await tech.get(`/api/sites/${f.siteB}/plan`)).status).toBe(404);
  });
});

describe('service records', () => {
  it('saves a note with photos on a zone and lists it there, with each photo served back', async () => {
    const res = await tech
      .post(`/api/zones/${f.zoneA}/service-records`)
      .field('summary', 'Replaced two nozzles')
      .field('details', 'Heads 3 and 5 were clogged with grit')
      .attach('photos', png(8, 6), 'before.png')
      .attach('photos', jpeg(), 'after.jpg');
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body).toMatchObject({ kind: 'note', zoneId: f.zoneA, summary: 'Replaced two nozzles', details: 'Heads 3 and 5 were clogged with grit', author: 'Fixture technician' });
    expect(res.body.photos).toEqual([
      expect.objectContaining({ n: 1, contentType: 'image/png', width: 8, height: 6 }),
      expect.objectContaining({ n: 2, contentType: 'image/jpeg', width: 4, height: 3 }),
    ]);
    const list = await tech.get(`/api/zones/${f.zoneA}/service-records`);
    expect(list.body.items[0]).toMatchObject({ id: res.body.id, photos: [{ n: 1 }, { n: 2 }] });
    const photo = await tech.get(res.body.photos[1].url);
    expect(photo.status).toBe(200);
    expect(photo.headers['content-type']).toBe('image/jpeg');
    const owner = await signedIn(app, f.users.owner.email);
    expect((await owner.get(res.body.photos[0].url)).status).toBe(200);
  });

  it('takes a plain JSON note on a controller', async () => {
    const res = await tech.post(`/api/controllers/${f.controllerA}/service-records`).send({ summary: 'Enclosure seal replaced' });
    expect(res.status).toBe(201);
    expect(res.body).toMatchObject({ controllerId: f.controllerA, zoneId: null, photos: [] });
    const list = await tech.get(`/api/controllers/${f.controllerA}/service-records`);
    expect(list.body.items.map((r: { id: number }) => r.id)).toContain(res.body.id);
  });

  it('refuses a record whose photo is not an image, or too many photos, and stores nothing', async () => {
    const records = await count('service_records');
    const files = storedFiles().length;
    const bad = await tech
      .post(`/api/zones/${f.zoneA}/service-records`)
      .field('summary', 'Should not be saved')
      .attach('photos', png(4, 4), 'ok.png')
      .attach('photos', Buffer.from('<html>not a photo</html>'), 'photo.jpg');
    expect(bad.status).toBe(400);
    expect(bad.body.error).toMatchObject({ code: 'not_an_image' });
    expect(bad.body.error.message).toMatch(/Photo 2/);
    let many = tech.post(`/api/zones/${f.zoneA}/service-records`).field('summary', 'Too many');
    for (let i = 0; i < 6; i++) many = many.attach('photos', png(2, 2), `p${i}.png`);
    const tooMany = await many;
    expect(tooMany.status).toBe(400);
    expect(tooMany.body.error.code).toBe('too_many_files');
    const big = await tech.post(`/api/zones/${f.zoneA}/service-records`).field('summary', 'Big').attach('photos', Buffer.concat([png(2, 2), Buffer.alloc(5 * 1024 * 1024)]), 'big.png');
    expect(big.body.error.code).toBe('file_too_large');
    const noSummary = await tech.post(`/api/zones/${f.zoneA}/service-records`).send({ details: 'no summary' });
    expect(noSummary.status).toBe(400);
    expect(await count('service_records')).toBe(records);
    expect(storedFiles()).toHaveLength(files);
  });

  it('is for field staff on sites they see', async () => {
    const owner = await signedIn(app, f.users.owner.email);
    expect((await owner.post(`/api/zones/${f.zoneA}/service-records`).send({ summary: 'x' })).status).toBe(403);
    expect((await tech.post(`/api/zones/${f.zoneB}/service-records`).send({ summary: 'x' })).status).toBe(404);
    expect((await tech.get('/api/service-records/999999/photos/1')).status).toBe(404);
  });
});
