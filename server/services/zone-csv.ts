/**
 * Zones as CSV: export a site's zones, a template with the same columns, and an import that
 * checks every row (the zone schema, then the board: controller by serial at this site, relay
 * on the board, free, not the master valve, not twice in the file) and saves all rows in one
 * transaction only when none has an error.
 */
import { and, asc, eq, inArray, isNull } from 'drizzle-orm';
import { parse as parseCsv, CsvError } from 'csv-parse/sync';
import { stringify } from 'csv-stringify/sync';
import { inTx, type Db } from '../db/client';
import { controllers, zones } from '../db/schema/index';
import { createZoneSchema, headTypes, plantTypes, soilTextures, type CreateZone } from '../contracts/zones';
import {
  ZONE_CSV_MAX_ROWS, requiredZoneCsvColumns, zoneCsvColumns, zoneCsvField,
  type ZoneCsvColumn, type ZoneCsvRowError,
} from '../contracts/uploads';
import { AppError, conflict, forbidden } from '../errors';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';
import type { UploadedFile } from './site-plans';

type Ctx = { db: Db; actor: Actor };

const NUMERIC: ZoneCsvColumn[] = ['relay', 'head_count', 'flow_per_head_lpm', 'area_m2', 'root_depth_m', 'efficiency', 'moisture_threshold_pct'];
const COLUMN_OF = Object.fromEntries(Object.entries(zoneCsvField).map(([col, field]) => [field, col])) as Record<string, ZoneCsvColumn>;

export const ZONE_CSV_TEMPLATE = [
  '# Runnel zones, one row per zone. Lines starting with # are ignored.',
  '# controller_serial: a controller at this site; relay: 1 to the board’s relay count, free and not the master valve.',
  `# plant_type: ${plantTypes.join(' | ')}`,
  `# soil_texture: ${soilTextures.join(' | ')}`,
  `# head_type: ${headTypes.join(' | ')}`,
  '# other_head_type (optional): another head type found on the same valve, not the head_type; empty = none.',
  '# head_count: heads on the zone; flow_per_head_lpm: L/min per head; area_m2: m²; root_depth_m: m.',
  '# Optional: efficiency 0.3–1 (empty = 0.75); moisture_threshold_pct 1–100 (empty = not used); notes.',
  '# Example: RN-ABCD-EFGH,3,Front lawn,cool_season_turf,loam,rotor,spray,8,5.5,120,0.15,0.7,,North side',
  zoneCsvColumns.join(','),
  '',
].join('\n');

async function writableSite(ctx: Ctx, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may import zones');
  return site;
}

/** Checked before the body is read. */
export const mayImportZones = (ctx: Ctx, siteId: number) => writableSite(ctx, siteId).then(() => undefined);

/** GET /api/sites/:id/zones.csv */
export async function exportZonesCsv(ctx: Ctx, siteId: number): Promise<{ filename: string; csv: string }> {
  const site = await loadVisibleSite(ctx, siteId);
  const rows = await ctx.db
    .select({ z: zones, serial: controllers.serial })
    .from(zones)
    .innerJoin(controllers, eq(zones.controllerId, controllers.id))
    .where(eq(controllers.siteId, siteId))
    .orderBy(asc(controllers.serial), asc(zones.relay));
  const records = rows.map(({ z, serial }) => [
    serial, z.relay, z.name, z.plantType, z.soilTexture, z.headType, z.otherHeadType ?? '', z.headCount, z.flowPerHeadLpm, z.areaM2, z.rootDepthM, z.efficiency,
    z.moistureThresholdPct ?? '', z.notes,
  ]);
  const csv = stringify(records, { header: true, columns: [...zoneCsvColumns] });
  const slug = site.name.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '') || `site-${site.id}`;
  return { filename: `runnel-zones-${slug}.csv`, csv };
}

const fileError = (code: string, message: string, details?: unknown) => new AppError(400, code, message, details);

function readRecords(file: UploadedFile | undefined) {
  if (!file) throw fileError('file_missing', 'Attach a CSV file in the form field "file"');
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(file.buffer);
  } catch {
    throw fileError('not_csv', 'The file is not a CSV text file (it is not UTF-8 text)');
  }
  if (text.includes('\u0000')) throw fileError('not_csv', 'The file is not a CSV text file (it holds binary data)');
  let raw: { record: string[]; info: { lines: number } }[];
  try {
    raw = parseCsv(text, { bom: true, comment: '#', comment_no_infix: true, skip_empty_lines: true, relax_column_count: true, info: true, trim: true }) as unknown as typeof raw;
  } catch (e) {
    const line = e instanceof CsvError && typeof e.lines === 'number' ? ` (line ${e.lines})` : '';
    throw fileError('csv_unreadable', `The file could not be read as CSV${line}`);
  }
  const records = raw.map((r) => ({ line: r.info.lines, cells: r.record })).filter((r) => !(r.cells.length === 1 && r.cells[0] === ''));
  if (records.length === 0) throw fileError('csv_empty', 'The file has no header and no rows');
  const names = records[0].cells.map((c) => c.trim().toLowerCase());
  const expected = `Expected a header row such as: ${zoneCsvColumns.join(',')}`;
  const missing = requiredZoneCsvColumns.filter((c) => !names.includes(c));
  if (missing.length) throw fileError('csv_missing_columns', `The file lacks the column${missing.length > 1 ? 's' : ''} ${missing.join(', ')}. ${expected}`, { missing, found: names });
  const unknown = names.filter((n) => !(zoneCsvColumns as readonly string[]).includes(n));
  if (unknown.length) throw fileError('csv_unknown_columns', `Unknown column${unknown.length > 1 ? 's' : ''} ${unknown.map((u) => `"${u}"`).join(', ')}. ${expected}`, { unknown, found: names });
  const dup = names.find((n, i) => names.indexOf(n) !== i);
  if (dup) throw fileError('csv_duplicate_columns', `The column ${dup} appears twice`);
  const rows = records.slice(1);
  if (rows.length === 0) throw fileError('csv_empty', 'The file has a header but no rows');
  if (rows.length > ZONE_CSV_MAX_ROWS) throw fileError('csv_too_many_rows', `The file has ${rows.length} rows; import at most ${ZONE_CSV_MAX_ROWS} at once`);
  return { header: names as ZoneCsvColumn[], rows };
}

export type ZonePreviewRow = CreateZone & { line: number; controllerSerial: string };

/** POST /api/sites/:id/zones/import[?dryRun=1] */
export async function importZonesCsv(ctx: Ctx, siteId: number, file: UploadedFile | undefined, dryRun: boolean) {
  await writableSite(ctx, siteId);
  const { header, rows } = readRecords(file);
  const boards = await ctx.db.select().from(controllers).where(and(eq(controllers.siteId, siteId), isNull(controllers.retiredAt)));
  const existing = boards.length
    ? await ctx.db.select({ controllerId: zones.controllerId, relay: zones.relay, name: zones.name }).from(zones).where(inArray(zones.controllerId, boards.map((b) => b.id)))
    : [];
  const errors: ZoneCsvRowError[] = [];
  const good: ZonePreviewRow[] = [];
  const inFile = new Map<string, number>();

  for (const { line, cells } of rows) {
    if (cells.length !== header.length) {
      errors.push({ line, field: null, message: `Expected ${header.length} values, found ${cells.length}` });
      continue;
    }
    const cell = Object.fromEntries(zoneCsvColumns.map((c) => [c, ''])) as Record<ZoneCsvColumn, string>;
    header.forEach((h, i) => (cell[h] = cells[i]));
    const rowErrors: ZoneCsvRowError[] = [];
    const obj: Record<string, unknown> = {};
    for (const col of zoneCsvColumns) {
      if (col === 'controller_serial') continue;
      const v = cell[col];
      if (NUMERIC.includes(col)) {
        if (v === '') {
          if (col === 'moisture_threshold_pct') obj[zoneCsvField[col]] = null;
          else if (col !== 'efficiency') rowErrors.push({ line, field: col, message: 'Required' });
        } else if (!/^-?\d+(\.\d+)?$/.test(v)) rowErrors.push({ line, field: col, message: `“${v.slice(0, 20)}” is not a number` });
        else obj[zoneCsvField[col]] = Number(v);
      } else if (col === 'other_head_type') obj[zoneCsvField[col]] = v === '' ? null : v;
      else if (v !== '' || col === 'name') obj[zoneCsvField[col]] = v;
    }
    const serial = cell.controller_serial.toUpperCase();
    const board = boards.find((b) => b.serial === serial);
    if (!serial) rowErrors.push({ line, field: 'controller_serial', message: 'Required' });
    else if (!board) rowErrors.push({ line, field: 'controller_serial', message: `No controller ${serial} at this site` });
    obj.controllerId = board?.id ?? 1;
    const parsed = createZoneSchema.safeParse(obj);
    if (!parsed.success) {
      for (const i of parsed.error.issues) {
        const field = COLUMN_OF[String(i.path[0] ?? '')] ?? null;
        if (!rowErrors.some((e) => e.field === field)) rowErrors.push({ line, field, message: i.message });
      }
    }
    if (parsed.success && board) {
      const z = parsed.data;
      const taken = existing.find((e) => e.controllerId === board.id && e.relay === z.relay);
      const key = `${board.id}:${z.relay}`;
      if (z.relay > board.relayCount) rowErrors.push({ line, field: 'relay', message: `${board.serial} has ${board.relayCount} relays` });
      else if (board.masterValveRelay === z.relay) rowErrors.push({ line, field: 'relay', message: `Relay ${z.relay} of ${board.serial} drives the master valve` });
      else if (taken) rowErrors.push({ line, field: 'relay', message: `Relay ${z.relay} of ${board.serial} is already wired to ${taken.name}` });
      else if (inFile.has(key)) rowErrors.push({ line, field: 'relay', message: `Relay ${z.relay} of ${board.serial} is also on line ${inFile.get(key)}` });
      inFile.set(key, inFile.get(key) ?? line);
    }
    if (rowErrors.length || !parsed.success || !board) {
      errors.push(...rowErrors);
      continue;
    }
    good.push({ ...parsed.data, line, controllerSerial: board.serial });
  }

  const summary = { rowCount: rows.length, validCount: good.length, errorCount: errors.length };
  if (dryRun) return { dryRun: true, saved: 0, ...summary, rows: good, errors };
  if (errors.length) {
    const lines = new Set(errors.map((e) => e.line)).size;
    throw new AppError(400, 'csv_rows_invalid', `${lines} row${lines > 1 ? 's have' : ' has'} errors; nothing was saved`, errors);
  }
  const ids = await inTx(ctx.db, async (tx) => {
    const inserted = await tx.insert(zones).values(good.map(({ line: _l, controllerSerial: _s, ...z }) => z)).returning({ id: zones.id });
    await recordAudit(tx, ctx.actor, {
      action: 'zone.import', entityType: 'zone', entityId: `site:${siteId}`, siteId,
      after: { file: file?.originalname ?? null, rows: good.length, zoneIds: inserted.map((z) => z.id) },
    });
    return inserted.map((z) => z.id);
  }).catch((e) => {
    if ((e as { cause?: { code?: string } })?.cause?.code === '23505') throw conflict('relay_taken', 'A relay in the file was taken meanwhile; nothing was saved. Check the file again.');
    throw e;
  });
  return { dryRun: false, saved: ids.length, ...summary, rows: good, errors, zoneIds: ids };
}
