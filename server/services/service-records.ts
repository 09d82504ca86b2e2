import { and, desc, eq, inArray } from 'drizzle-orm';
import { z } from 'zod';
import { inTx, type Db } from '../db/client';
import { serviceRecordPhotos, serviceRecords, users } from '../db/schema/index';
import { PHOTO_MAX_BYTES, serviceRecordSchema, type ImageType, type ServiceRecordView } from '../contracts/uploads';
import { parse } from '../middleware/validate';
import { notFound } from '../errors';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleController } from './controllers';
import { loadVisibleZone } from './zones';
import { checkImage, removeFile, requireFieldStaff, storeFile, storedPath, type CheckedImage, type UploadedFile } from './site-plans';

type Ctx = { db: Db; actor: Actor };
export type RecordTarget = { zoneId: number } | { controllerId: number };

async function resolve(ctx: Ctx, t: RecordTarget) {
  if ('zoneId' in t) {
    const { zone, site } = await loadVisibleZone(ctx, t.zoneId);
    return { siteId: site.id, zoneId: zone.id, controllerId: zone.controllerId };
  }
  const c = await loadVisibleController(ctx, t.controllerId);
  return { siteId: c.siteId, zoneId: null, controllerId: c.id };
}

/** Before the body is read: the zone or controller exists for the caller, who may write notes. */
export async function mayWriteRecord(ctx: Ctx, t: RecordTarget) {
  await resolve(ctx, t);
  requireFieldStaff(ctx.actor, 'write a service record');
}

const photoUrl = (recordId: number, n: number) => `/api/service-records/${recordId}/photos/${n}`;

async function views(db: Db, where: ReturnType<typeof eq>): Promise<ServiceRecordView[]> {
  const rows = await db
    .select({ r: serviceRecords, author: users.name })
    .from(serviceRecords)
    .leftJoin(users, eq(serviceRecords.authorId, users.id))
    .where(where)
    .orderBy(desc(serviceRecords.createdAt), desc(serviceRecords.id))
    .limit(100);
  const photos = rows.length
    ? await db.select().from(serviceRecordPhotos).where(inArray(serviceRecordPhotos.serviceRecordId, rows.map((x) => x.r.id))).orderBy(serviceRecordPhotos.n)
    : [];
  return rows.map(({ r, author }) => ({
    id: r.id, kind: r.kind, siteId: r.siteId, zoneId: r.zoneId, controllerId: r.controllerId, summary: r.summary, details: r.details,
    createdAt: r.createdAt.toISOString(), author: author ?? null,
    photos: photos
      .filter((p) => p.serviceRecordId === r.id)
      .map((p) => ({ n: p.n, contentType: p.contentType as ImageType, width: p.width, height: p.height, bytes: p.bytes, url: photoUrl(r.id, p.n) })),
  }));
}

/** GET /api/zones/:id/service-records, GET /api/controllers/:id/service-records — newest first, at most 100. */
export async function listServiceRecords(ctx: Ctx, t: RecordTarget): Promise<ServiceRecordView[]> {
  const target = await resolve(ctx, t);
  return views(ctx.db, 'zoneId' in t ? eq(serviceRecords.zoneId, target.zoneId!) : eq(serviceRecords.controllerId, target.controllerId));
}

/** POST …/service-records — a note (JSON, or multipart with up to 5 photos in "photos"). Photos are checked before anything is stored. */
export async function createServiceRecord(ctx: Ctx & { uploadDir: string }, t: RecordTarget, raw: unknown, files: UploadedFile[] = []): Promise<ServiceRecordView> {
  const target = await resolve(ctx, t);
  requireFieldStaff(ctx.actor, 'write a service record');
  const input = parse(serviceRecordSchema, raw);
  const checked: CheckedImage[] = [];
  for (const [i, f] of files.entries()) checked.push(await checkImage(f.buffer, PHOTO_MAX_BYTES, `Photo ${i + 1}${f.originalname ? ` (${f.originalname.slice(0, 60)})` : ''}`));
  const stored: string[] = [];
  try {
    for (const [i, f] of files.entries()) stored.push(await storeFile(ctx.uploadDir, 'photos', f.buffer, checked[i].ext));
    const id = await inTx(ctx.db, async (tx) => {
      const [r] = await tx
        .insert(serviceRecords)
        .values({
          siteId: target.siteId, zoneId: target.zoneId, controllerId: 'zoneId' in t ? null : target.controllerId,
          kind: 'note', authorId: ctx.actor.userId || null, summary: input.summary, details: input.details ?? null,
        })
        .returning();
      if (files.length) {
        await tx.insert(serviceRecordPhotos).values(
          files.map((f, i) => ({ serviceRecordId: r.id, n: i + 1, storedName: stored[i], contentType: checked[i].contentType, width: checked[i].width, height: checked[i].height, bytes: f.buffer.length })),
        );
      }
      await recordAudit(tx, ctx.actor, {
        action: 'service_record.create', entityType: 'service_record', entityId: r.id, siteId: target.siteId,
        after: { zoneId: r.zoneId, controllerId: r.controllerId, summary: r.summary, photos: files.length },
      });
      return r.id;
    });
    return (await views(ctx.db, eq(serviceRecords.id, id)))[0];
  } catch (e) {
    for (const name of stored) await removeFile(ctx.uploadDir, 'photos', name);
    throw e;
  }
}

export const photoParams = z.object({ id: z.coerce.number().int().positive(), n: z.coerce.number().int().min(1).max(99) });

/** GET /api/service-records/:id/photos/:n — the stored file, for someone who sees the record's site. */
export async function loadPhoto(ctx: Ctx & { uploadDir: string }, recordId: number, n: number) {
  const [row] = await ctx.db
    .select({ p: serviceRecordPhotos, siteId: serviceRecords.siteId })
    .from(serviceRecordPhotos)
    .innerJoin(serviceRecords, eq(serviceRecordPhotos.serviceRecordId, serviceRecords.id))
    .where(and(eq(serviceRecordPhotos.serviceRecordId, recordId), eq(serviceRecordPhotos.n, n)));
  if (!row || !canSeeSite(ctx.actor, row.siteId)) throw notFound('Photo');
  return { path: storedPath(ctx.uploadDir, 'photos', row.p.storedName), contentType: row.p.contentType, etag: `${recordId}-${n}-${row.p.bytes}` };
}
