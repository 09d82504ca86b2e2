/**
 * Weather from a CSV file: read, check every row, preview, and save all rows in one
 * transaction only when none has an error. Columns are documented in docs/weather.md and
 * served as a template at GET /api/weather/template.csv.
 */
import { and, eq, gte, lte } from 'drizzle-orm';
import { parse as parseCsv, CsvError } from 'csv-parse/sync';
import { inTx } from '../db/client';
import { weatherDays, type Site } from '../db/schema/index';
import {
  CSV_MAX_ROWS,
  csvColumnField,
  csvColumns,
  csvRowSchema,
  requiredCsvColumns,
  type CsvColumn,
  type CsvRow,
  type CsvRowError,
} from '../contracts/weather';
import { AppError } from '../errors';
import { DomainInputError } from '../domain/errors';
import { recordAudit } from './audit';
import { computeEt0, DOMAIN_FIELD, loadWritableSite, siteToday, upsertDays, type Ctx, type DayToStore } from './weather';
import { round } from './views';

export const CSV_TEMPLATE = [
  '# Runnel daily weather, one row per local calendar day of the site. Lines starting with # are ignored.',
  '# Required: date (YYYY-MM-DD), tmax_c and tmin_c (°C). Leave a cell empty where nothing was measured;',
  '# ET₀ then follows FAO-56 (humidity from Tmin, radiation from the temperature range, wind 2 m/s).',
  '# rh_max_pct, rh_min_pct: relative humidity %; wind_ms: mean wind m/s measured at wind_height_m (default 2 m);',
  '# sunshine_h: hours of bright sunshine; solar_mj: solar radiation MJ/m² per day; rain_mm: rain mm (empty = 0).',
  '# Example: 2025-07-01,31.2,16.4,82,28,2.6,2,11.5,,0',
  csvColumns.join(','),
  '',
].join('\n');

const FILE_ERROR = (code: string, message: string, details?: unknown) => new AppError(400, code, message, details);

export type UploadedFile = { buffer: Buffer; originalname?: string; size: number };

type Parsed = { line: number; cells: string[] }[];

/** Bytes → records with their line numbers, or a 400 explaining why the file is not a weather CSV. */
function readRecords(file: UploadedFile | undefined): { header: CsvColumn[]; records: Parsed } {
  if (!file) throw FILE_ERROR('file_missing', 'Attach a CSV file in the form field "file"');
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(file.buffer);
  } catch {
    throw FILE_ERROR('not_csv', 'The file is not a CSV text file (it is not UTF-8 text)');
  }
  if (text.includes('\u0000')) throw FILE_ERROR('not_csv', 'The file is not a CSV text file (it holds binary data)');
  if (text.trim() === '') throw FILE_ERROR('csv_empty', 'The file is empty');

  let raw: { record: string[]; info: { lines: number } }[];
  try {
    raw = parseCsv(text, {
      bom: true, comment: '#', comment_no_infix: true, skip_empty_lines: true, relax_column_count: true, info: true, trim: true,
    }) as unknown as typeof raw;
  } catch (e) {
    const line = e instanceof CsvError && typeof e.lines === 'number' ? ` (line ${e.lines})` : '';
    throw FILE_ERROR('csv_unreadable', `The file could not be read as CSV${line}: ${e instanceof Error ? e.message : 'unknown error'}`);
  }
  const records = raw
    .map((r) => ({ line: r.info.lines, cells: r.record }))
    .filter((r) => !(r.cells.length === 1 && r.cells[0] === ''));
  if (records.length === 0) throw FILE_ERROR('csv_empty', 'The file has no header and no rows');

  const names = records[0].cells.map((c) => c.trim().toLowerCase());
  const known = new Set<string>(csvColumns);
  const unknown = names.filter((n) => !known.has(n));
  const missing = requiredCsvColumns.filter((c) => !names.includes(c));
  const expected = `Expected a header row such as: ${csvColumns.join(',')}`;
  if (missing.length) {
    throw FILE_ERROR('csv_missing_columns', `The file lacks the column${missing.length > 1 ? 's' : ''} ${missing.join(', ')}. ${expected}`, {
      missing, found: names,
    });
  }
  if (unknown.length) {
    throw FILE_ERROR('csv_unknown_columns', `Unknown column${unknown.length > 1 ? 's' : ''} ${unknown.map((u) => `"${u}"`).join(', ')}. ${expected}`, {
      unknown, found: names,
    });
  }
  const dup = names.find((n, i) => names.indexOf(n) !== i);
  if (dup) throw FILE_ERROR('csv_duplicate_columns', `The column ${dup} appears twice`);
  const rows = records.slice(1);
  if (rows.length === 0) throw FILE_ERROR('csv_empty', 'The file has a header but no rows');
  if (rows.length > CSV_MAX_ROWS) {
    throw FILE_ERROR('csv_too_many_rows', `The file has ${rows.length} rows; import at most ${CSV_MAX_ROWS} at once`);
  }
  return { header: names as CsvColumn[], records: rows };
}

/** API field → CSV column, for domain errors. */
const COLUMN_OF: Record<string, string> = Object.fromEntries(Object.entries(csvColumnField).map(([col, field]) => [field, col]));

export type PreviewRow = CsvRow & { line: number; et0Mm: number; et0Method: string; replaces: boolean };

/** Check every row; collect per-row errors and the rows that would be stored. */
function checkRows(header: CsvColumn[], records: Parsed, site: Site, nowMs: number) {
  const today = siteToday(site, nowMs);
  const errors: CsvRowError[] = [];
  const good: (DayToStore & { line: number })[] = [];
  const seen = new Map<string, number>();
  for (const { line, cells } of records) {
    if (cells.length !== header.length) {
      errors.push({ line, field: null, message: `Expected ${header.length} values, found ${cells.length}` });
      continue;
    }
    const obj: Record<string, string> = Object.fromEntries(csvColumns.map((c) => [c, '']));
    header.forEach((h, i) => (obj[h] = cells[i]));
    const r = csvRowSchema.safeParse(obj);
    if (!r.success) {
      for (const i of r.error.issues) errors.push({ line, field: String(i.path[0] ?? '') || null, message: i.message });
      continue;
    }
    const row = r.data;
    if (row.date > today) {
      errors.push({ line, field: 'date', message: `${row.date} is after today at the site (${today})` });
      continue;
    }
    const earlier = seen.get(row.date);
    if (earlier !== undefined) {
      errors.push({ line, field: 'date', message: `${row.date} is already on line ${earlier}` });
      continue;
    }
    seen.set(row.date, line);
    try {
      const et0 = computeEt0(site, row.date, row);
      good.push({ ...row, ...et0, source: 'csv', line });
    } catch (e) {
      if (!(e instanceof DomainInputError)) throw e;
      const apiField = DOMAIN_FIELD[e.field] ?? e.field;
      errors.push({ line, field: COLUMN_OF[apiField] ?? apiField, message: e.message });
    }
  }
  return { errors, good };
}

export async function importWeatherCsv(ctx: Ctx, siteId: number, file: UploadedFile | undefined, dryRun: boolean) {
  const site = await loadWritableSite(ctx, siteId);
  const { header, records } = readRecords(file);
  const { errors, good } = checkRows(header, records, site, (ctx.now ?? Date.now)());

  const dates = good.map((g) => g.date).sort();
  const existing = new Set<string>();
  if (dates.length) {
    const rows = await ctx.db
      .select({ date: weatherDays.date })
      .from(weatherDays)
      .where(and(eq(weatherDays.siteId, siteId), gte(weatherDays.date, dates[0]), lte(weatherDays.date, dates[dates.length - 1])));
    for (const r of rows) existing.add(r.date);
  }
  const rows: PreviewRow[] = good.map(({ source: _s, ...g }) => ({ ...g, et0Mm: round(g.et0Mm, 2), replaces: existing.has(g.date) }));
  const summary = { rowCount: records.length, validCount: good.length, errorCount: errors.length, replaceCount: rows.filter((r) => r.replaces).length };

  if (dryRun) return { dryRun: true, saved: 0, ...summary, rows, errors };
  if (errors.length) {
    const lines = new Set(errors.map((e) => e.line)).size;
    throw new AppError(400, 'csv_rows_invalid', `${lines} row${lines > 1 ? 's have' : ' has'} errors; nothing was saved`, errors);
  }
  await inTx(ctx.db, async (tx) => {
    await upsertDays(tx, siteId, good.map(({ line: _l, ...g }) => g));
    await recordAudit(tx, ctx.actor, {
      action: 'weather.import', entityType: 'weather_day', entityId: `${siteId}:${dates[0]}..${dates[dates.length - 1]}`, siteId,
      after: { file: file?.originalname ?? null, rows: good.length, from: dates[0], to: dates[dates.length - 1], replaced: summary.replaceCount },
    });
  });
  return { dryRun: false, saved: good.length, ...summary, rows, errors };
}
