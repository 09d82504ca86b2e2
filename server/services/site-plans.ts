import { randomUUID, createHash } from 'node:crypto';
import fs from 'node:fs/promises';
import path from 'node:path';
import { fileTypeFromBuffer } from 'file-type';
import { imageSize } from 'image-size';
import { and, eq, inArray } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { controllers, sitePlans, zoneMarkers, zones, type SitePlan } from '../db/schema/index';
import { IMAGE_MAX_SIDE, IMAGE_TYPES, markersSchema, type ImageType, type SitePlanView, type ZoneMarker } from '../contracts/uploads';
import { parse } from '../middleware/validate';
import { AppError, conflict, forbidden, notFound } from '../errors';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';

export type UploadCtx = { db: Db; actor: Actor; uploadDir: string };
export type UploadedFile = { buffer: Buffer; originalname?: string; size: number };
export type CheckedImage = { contentType: ImageType; ext: 'png' | 'jpg' | 'webp'; width: number; height: number };

const EXT: Record<ImageType, CheckedImage['ext']> = { 'image/png': 'png', 'image/jpeg': 'jpg', 'image/webp': 'webp' };
const MB = (n: number) => `${Math.round(n / 1024 / 1024)} MB`;

/** The end of the file is where a cut-short upload shows: PNG ends with IEND, JPEG with EOI, WebP's RIFF size must match. */
function complete(buf: Buffer, type: ImageType): boolean {
  if (type === 'image/png') return buf.length > 12 && buf.subarray(buf.length - 8, buf.length - 4).toString('latin1') === 'IEND';
  if (type === 'image/jpeg') {
    const tail = buf.subarray(Math.max(0, buf.length - 64));
    for (let i = tail.length - 2; i >= 0; i--) if (tail[i] === 0xff && tail[i + 1] === 0xd9) return true;
    return false;
  }
  if (buf.length < 12) return false;
  const riff = buf.readUInt32LE(4) + 8;
  return riff === buf.length || riff + 1 === buf.length;
}

/**
 * Accept a PNG, JPEG or WebP judged by its content (never its name or the browser's type):
 * the magic bytes (file-type), the header's dimensions (image-size) and an intact end of file.
 */
export async function checkImage(buf: Buffer, maxBytes: number, what: string): Promise<CheckedImage> {
  if (buf.length === 0) throw new AppError(400, 'file_empty', `${what} is empty`);
  if (buf.length > maxBytes) throw new AppError(400, 'file_too_large', `${what} is larger than ${MB(maxBytes)}`);
  const ft = await fileTypeFromBuffer(buf);
  if (!ft || !(IMAGE_TYPES as readonly string[]).includes(ft.mime)) {
    const seen = ft ? ` Its content is ${ft.mime}.` : '';
    throw new AppError(400, 'not_an_image', `${what} is not a PNG, JPEG or WebP image.${seen} Runnel reads the file’s content, not its name.`);
  }
  const contentType = ft.mime as ImageType;
  let width = 0;
  let height = 0;
  try {
    const d = imageSize(buf);
    width = d.width ?? 0;
    height = d.height ?? 0;
  } catch {
    /* handled below */
  }
  if (!width || !height || !complete(buf, contentType)) {
    throw new AppError(400, 'broken_image', `${what} looks like an image but is damaged or cut short; export it again and retry`);
  }
  if (width > IMAGE_MAX_SIDE || height > IMAGE_MAX_SIDE) {
    throw new AppError(400, 'image_too_large', `${what} is ${width} × ${height} pixels; at most ${IMAGE_MAX_SIDE} pixels a side`);
  }
  return { contentType, ext: EXT[contentType], width, height };
}

/** Write a checked upload under UPLOAD_DIR/<kind>/ with a random name; returns that name. */
export async function storeFile(uploadDir: string, kind: 'plans' | 'photos', buf: Buffer, ext: string): Promise<string> {
  const dir = path.join(path.resolve(uploadDir), kind);
  await fs.mkdir(dir, { recursive: true });
  const name = `${randomUUID()}.${ext}`;
  await fs.writeFile(path.join(dir, name), buf, { flag: 'wx', mode: 0o640 });
  return name;
}

export const storedPath = (uploadDir: string, kind: 'plans' | 'photos', name: string) => path.join(path.resolve(uploadDir), kind, path.basename(name));

export async function removeFile(uploadDir: string, kind: 'plans' | 'photos', name: string) {
  await fs.rm(storedPath(uploadDir, kind, name), { force: true }).catch(() => {});
}

const FIELD_ROLES = new Set(['admin', 'manager', 'technician']);
export function requireFieldStaff(actor: Actor, what: string) {
  if (!FIELD_ROLES.has(actor.role)) throw forbidden(`Only an admin, manager or technician may ${what}`);
}

function planView(p: SitePlan): SitePlanView {
  return {
    siteId: p.siteId, contentType: p.contentType as ImageType, width: p.width, height: p.height, bytes: p.bytes, sha256: p.sha256,
    uploadedAt: p.uploadedAt.toISOString(), url: `/api/sites/${p.siteId}/plan`,
  };
}

/** Before the body is read: the site exists for the caller and the caller may upload. */
export async function mayUploadPlan(ctx: Omit<UploadCtx, 'uploadDir'>, siteId: number) {
  await loadVisibleSite(ctx, siteId);
  requireFieldStaff(ctx.actor, 'upload a site plan');
}

/** POST /api/sites/:id/plan — replaces the site's plan; markers stay (they are fractions of the image). */
export async function uploadPlan(ctx: UploadCtx, siteId: number, file: UploadedFile | undefined, maxBytes: number): Promise<SitePlanView> {
  await mayUploadPlan(ctx, siteId);
  if (!file) throw new AppError(400, 'file_missing', 'Attach the plan image in the form field "file"');
  const img = await checkImage(file.buffer, maxBytes, 'The plan');
  const storedName = await storeFile(ctx.uploadDir, 'plans', file.buffer, img.ext);
  const sha256 = createHash('sha256').update(file.buffer).digest('hex');
  try {
    const { row, old } = await inTx(ctx.db, async (tx) => {
      const [old] = await tx.select().from(sitePlans).where(eq(sitePlans.siteId, siteId));
      const values = { storedName, contentType: img.contentType, width: img.width, height: img.height, bytes: file.buffer.length, sha256, uploadedBy: ctx.actor.userId || null, uploadedAt: new Date() };
      const [row] = await tx.insert(sitePlans).values({ siteId, ...values }).onConflictDoUpdate({ target: sitePlans.siteId, set: values }).returning();
      await recordAudit(tx, ctx.actor, {
        action: 'site.plan_upload', entityType: 'site', entityId: siteId, siteId,
        before: old ? planView(old) : null,
        after: { ...planView(row), file: file.originalname ?? null },
      });
      return { row, old };
    });
    if (old) await removeFile(ctx.uploadDir, 'plans', old.storedName);
    return planView(row);
  } catch (e) {
    await removeFile(ctx.uploadDir, 'plans', storedName);
    throw e;
  }
}

export async function loadPlan(ctx: Omit<UploadCtx, 'uploadDir'>, siteId: number): Promise<SitePlan> {
  await loadVisibleSite(ctx, siteId);
  const [p] = await ctx.db.select().from(sitePlans).where(eq(sitePlans.siteId, siteId));
  if (!p) throw notFound('Site plan');
  return p;
}

async function markersOf(db: Db, siteId: number): Promise<ZoneMarker[]> {
  const rows = await db.select().from(zoneMarkers).where(eq(zoneMarkers.siteId, siteId)).orderBy(zoneMarkers.zoneId);
  return rows.map((m) => ({ zoneId: m.zoneId, x: m.x, y: m.y }));
}

/** GET /api/sites/:id/plan/markers — the plan's facts (or null) and every zone's marker. */
export async function planWithMarkers(ctx: Omit<UploadCtx, 'uploadDir'>, siteId: number) {
  await loadVisibleSite(ctx, siteId);
  const [p] = await ctx.db.select().from(sitePlans).where(eq(sitePlans.siteId, siteId));
  return { plan: p ? planView(p) : null, markers: await markersOf(ctx.db, siteId) };
}

/** PUT /api/sites/:id/plan/markers — the full set: zones left out lose their marker. */
export async function putMarkers(ctx: Omit<UploadCtx, 'uploadDir'>, siteId: number, raw: unknown) {
  await loadVisibleSite(ctx, siteId);
  requireFieldStaff(ctx.actor, 'place zones on the plan');
  const { markers } = parse(markersSchema, raw);
  const [p] = await ctx.db.select({ siteId: sitePlans.siteId }).from(sitePlans).where(eq(sitePlans.siteId, siteId));
  if (!p) throw conflict('no_plan', 'Upload a site plan before placing zones on it');
  const ids = markers.map((m) => m.zoneId);
  const found = ids.length
    ? await ctx.db
        .select({ id: zones.id })
        .from(zones)
        .innerJoin(controllers, eq(zones.controllerId, controllers.id))
        .where(and(inArray(zones.id, ids), eq(controllers.siteId, siteId)))
    : [];
  const problems = markers.flatMap((m, i) => (found.some((f) => f.id === m.zoneId) ? [] : [{ path: `markers.${i}.zoneId`, message: `Zone ${m.zoneId} is not at this site` }]));
  if (problems.length) throw new AppError(400, 'validation_failed', 'Some fields are not valid', problems);
  const before = await markersOf(ctx.db, siteId);
  await inTx(ctx.db, async (tx) => {
    await tx.delete(zoneMarkers).where(eq(zoneMarkers.siteId, siteId));
    if (markers.length) await tx.insert(zoneMarkers).values(markers.map((m) => ({ ...m, siteId })));
    await recordAudit(tx, ctx.actor, { action: 'site.plan_markers', entityType: 'site', entityId: siteId, siteId, before: { markers: before }, after: { markers } });
  });
  return { markers: await markersOf(ctx.db, siteId) };
}
