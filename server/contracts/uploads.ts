import { z } from 'zod';

/** Files people send: site plans, service photos, zones as CSV; and what is stored with them. */

export const IMAGE_TYPES = ['image/png', 'image/jpeg', 'image/webp'] as const;
export type ImageType = (typeof IMAGE_TYPES)[number];
export const PLAN_MAX_BYTES = 10 * 1024 * 1024;
export const PHOTO_MAX_BYTES = 5 * 1024 * 1024;
export const PHOTO_MAX_COUNT = 5;
/** Longest side accepted, in pixels (a plan bigger than this is a scan to shrink first). */
export const IMAGE_MAX_SIDE = 20_000;

export type SitePlanView = {
  siteId: number;
  contentType: ImageType;
  width: number;
  height: number;
  bytes: number;
  sha256: string;
  uploadedAt: string;
  /** GET this for the image. */
  url: string;
};

export type ZoneMarker = { zoneId: number; x: number; y: number };

const fraction = z.number().min(0, 'Between 0 and 1 (a fraction of the image)').max(1, 'Between 0 and 1 (a fraction of the image)');

export const markersSchema = z.strictObject({
  markers: z
    .array(z.strictObject({ zoneId: z.number().int().positive(), x: fraction, y: fraction }))
    .max(2000)
    .refine((m) => new Set(m.map((x) => x.zoneId)).size === m.length, { message: 'Each zone once' }),
});

// --- service records ---

/** JSON body, or the text fields of a multipart form (with up to 5 files in the field "photos"). */
export const serviceRecordSchema = z.strictObject({
  summary: z.string().trim().min(1, 'Say what was found or done').max(300),
  details: z.string().trim().max(4000).optional(),
});

export type ServicePhotoView = { n: number; contentType: ImageType; width: number; height: number; bytes: number; url: string };
export type ServiceRecordView = {
  id: number;
  kind: string;
  siteId: number;
  zoneId: number | null;
  controllerId: number | null;
  summary: string;
  details: unknown;
  createdAt: string;
  author: string | null;
  photos: ServicePhotoView[];
};

// --- zones as CSV ---

/** Columns of the zones CSV, in order (export, template and import share them). */
export const zoneCsvColumns = [
  'controller_serial', 'relay', 'name', 'plant_type', 'soil_texture', 'head_type', 'other_head_type', 'head_count',
  'flow_per_head_lpm', 'area_m2', 'root_depth_m', 'efficiency', 'moisture_threshold_pct', 'notes',
] as const;
export type ZoneCsvColumn = (typeof zoneCsvColumns)[number];
export const requiredZoneCsvColumns: ZoneCsvColumn[] = [
  'controller_serial', 'relay', 'name', 'plant_type', 'soil_texture', 'head_type', 'head_count', 'flow_per_head_lpm', 'area_m2', 'root_depth_m',
];
/** CSV column → zone field (server/contracts/zones.ts). */
export const zoneCsvField: Record<ZoneCsvColumn, string> = {
  controller_serial: 'controllerId', relay: 'relay', name: 'name', plant_type: 'plantType', soil_texture: 'soilTexture',
  head_type: 'headType', other_head_type: 'otherHeadType', head_count: 'headCount', flow_per_head_lpm: 'flowPerHeadLpm', area_m2: 'areaM2',
  root_depth_m: 'rootDepthM', efficiency: 'efficiency', moisture_threshold_pct: 'moistureThresholdPct', notes: 'notes',
};
export const ZONE_CSV_MAX_BYTES = 1024 * 1024;
export const ZONE_CSV_MAX_ROWS = 2000;

export const zoneImportQuery = z.object({
  dryRun: z
    .enum(['0', '1', 'true', 'false'])
    .optional()
    .transform((v) => v === '1' || v === 'true'),
});

export type ZoneCsvRowError = { line: number; field: ZoneCsvColumn | null; message: string };
