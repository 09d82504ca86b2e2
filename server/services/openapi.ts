import { z } from 'zod';
import { alertListQuerySchema, mailPreferencesSchema } from '../contracts/alerts';
import { signInSchema, updateMeSchema } from '../contracts/auth';
import { createControllerSchema, updateControllerSchema } from '../contracts/controllers';
import { readingsQuerySchema, reviewQuerySchema, runHistoryFilterSchema, runHistoryQuerySchema, waterUseQuerySchema } from '../contracts/history';
import { createProgramSchema, rainDelaySchema, updateProgramSchema, walkSchema, walkStepSchema } from '../contracts/programs';
import { createSiteSchema, updateSiteSchema } from '../contracts/sites';
import { groupHeadsSchema, planningQuery, supplyTestInputSchema } from '../contracts/supply';
import { createTokenSchema, moveControllerSchema, provisionControllerSchema, relayMapSchema, setupSheetSchema } from '../contracts/tokens';
import { markersSchema, serviceRecordSchema, zoneImportQuery } from '../contracts/uploads';
import { acceptInviteSchema, auditQuerySchema, inviteSchema, resetConfirmSchema, resetRequestSchema, updateUserSchema } from '../contracts/users';
import { importQuery, wateringNeedQuery, weatherDayInputSchema, weatherFetchSchema, weatherRangeQuery } from '../contracts/weather';
import { createWebhookSchema, deliveriesQuerySchema, updateWebhookSchema } from '../contracts/webhooks';
import { createZoneSchema, updateZoneSchema } from '../contracts/zones';

/**
 * The REST API as OpenAPI 3.1, built from the same zod schemas the routes validate with.
 * One line per route below; tests/integration/openapi.test.ts fails when a mounted route is
 * missing here (or listed here but not mounted). Where a route keeps its schema to itself, the
 * line says what it takes in words (`note`).
 */
type Produces = 'json' | 'csv' | 'html' | 'image' | 'none';
type Op = {
  /** "METHOD /api/path/:param", as Express mounts it. */
  route: string;
  summary: string;
  tag: string;
  roles?: string;
  body?: z.ZodType;
  query?: z.ZodType;
  /** multipart/form-data: file fields (name → what), plus the text fields of `body`. */
  files?: Record<string, { description: string; many?: boolean }>;
  note?: string;
  produces?: Produces;
  status?: number;
  /** No sign-in needed. */
  open?: boolean;
};

const ALL = 'every signed-in role (scoped to their sites)';
const ADMIN = 'admin';
const STAFF = 'admin, manager, technician';
const ADMIN_MANAGER = 'admin, manager';

export const operations: Op[] = [
  { route: 'GET /api/health', tag: 'system', summary: 'Liveness and database check', open: true },
  { route: 'GET /api/openapi.json', tag: 'system', summary: 'This document' },
  // account
  { route: 'POST /api/auth/sign-in', tag: 'account', summary: 'Sign in; sets the session cookie', body: signInSchema, open: true },
  { route: 'POST /api/auth/sign-out', tag: 'account', summary: 'End the session', status: 204, produces: 'none', open: true },
  { route: 'GET /api/auth/me', tag: 'account', summary: 'The signed-in person' },
  { route: 'PATCH /api/auth/me', tag: 'account', summary: 'Change one’s own name or units', body: updateMeSchema },
  { route: 'POST /api/auth/accept-invite', tag: 'account', summary: 'Set the first password with an invitation link’s token', body: acceptInviteSchema, open: true },
  { route: 'POST /api/auth/password-reset', tag: 'account', summary: 'Mail a reset link (always 202, whether or not the address exists)', body: resetRequestSchema, status: 202, open: true },
  { route: 'POST /api/auth/password-reset/confirm', tag: 'account', summary: 'Set a new password with a reset link’s token; ends every session', body: resetConfirmSchema, open: true },
  { route: 'GET /api/me/mail-preferences', tag: 'account', summary: 'Which alert mail one receives' },
  { route: 'PUT /api/me/mail-preferences', tag: 'account', summary: 'Choose alert mail', body: mailPreferencesSchema },
  // people
  { route: 'GET /api/users', tag: 'people', summary: 'Everyone, with status, sites and pending invitation', roles: ADMIN },
  { route: 'POST /api/users/invitations', tag: 'people', summary: 'Invite a person by e-mail (single-use link, 72 h)', roles: ADMIN, body: inviteSchema, status: 201 },
  { route: 'POST /api/users/:id/invitation/resend', tag: 'people', summary: 'Send a new invitation link; the old one stops working', roles: ADMIN },
  { route: 'DELETE /api/users/:id/invitation', tag: 'people', summary: 'Withdraw an invitation (the account stays disabled)', roles: ADMIN },
  { route: 'PATCH /api/users/:id', tag: 'people', summary: 'Change role, name, sites; disable (ends their sessions at once)', roles: ADMIN, body: updateUserSchema },
  { route: 'GET /api/audit', tag: 'people', summary: 'Audit log, newest first (owners: valve entries of their sites)', query: auditQuerySchema },
  // sites
  { route: 'GET /api/sites', tag: 'sites', summary: 'Sites one may see, with counts and warnings' },
  { route: 'POST /api/sites', tag: 'sites', summary: 'Add a site', roles: ADMIN, body: createSiteSchema, status: 201 },
  { route: 'GET /api/sites/:id', tag: 'sites', summary: 'A site with its controllers and zones' },
  { route: 'PATCH /api/sites/:id', tag: 'sites', summary: 'Change a site', roles: ADMIN_MANAGER, body: updateSiteSchema },
  { route: 'DELETE /api/sites/:id', tag: 'sites', summary: 'Remove a site without controllers', roles: ADMIN, status: 204, produces: 'none' },
  { route: 'POST /api/sites/:id/plan', tag: 'sites', summary: 'Upload the site plan image (type checked from the content)', roles: STAFF, files: { file: { description: 'PNG, JPEG or WebP, at most 10 MB' } }, status: 201 },
  { route: 'GET /api/sites/:id/plan', tag: 'sites', summary: 'The site plan image', produces: 'image' },
  { route: 'GET /api/sites/:id/plan/markers', tag: 'sites', summary: 'The plan’s facts (or null) and each zone’s marker' },
  { route: 'PUT /api/sites/:id/plan/markers', tag: 'sites', summary: 'Place zones on the plan (x, y as fractions 0..1 of the image)', roles: STAFF, body: markersSchema },
  // controllers
  { route: 'GET /api/controllers', tag: 'controllers', summary: 'Controllers one may see', note: 'Query: siteId (optional)' },
  { route: 'POST /api/controllers', tag: 'controllers', summary: 'Register a controller with a serial of one’s own (see provision)', roles: ADMIN, body: createControllerSchema, status: 201 },
  { route: 'GET /api/controllers/:id', tag: 'controllers', summary: 'A controller' },
  { route: 'PATCH /api/controllers/:id', tag: 'controllers', summary: 'Change a controller', roles: ADMIN_MANAGER, body: updateControllerSchema },
  { route: 'DELETE /api/controllers/:id', tag: 'controllers', summary: 'Remove a controller and its zones (retire keeps history)', roles: ADMIN, status: 204, produces: 'none' },
  { route: 'POST /api/sites/:id/controllers/provision', tag: 'controllers', summary: 'Provision: Runnel generates serial and secret; the secret is in this answer only', roles: ADMIN, body: provisionControllerSchema, status: 201 },
  { route: 'GET /api/controllers/:id/setup-sheet', tag: 'controllers', summary: 'Printable setup sheet without the secret', roles: STAFF, produces: 'html' },
  { route: 'POST /api/controllers/:id/setup-sheet', tag: 'controllers', summary: 'Printable setup sheet with the secret just shown (JSON or form post)', roles: ADMIN, body: setupSheetSchema, produces: 'html' },
  { route: 'POST /api/controllers/:id/rotate-secret', tag: 'controllers', summary: 'New secret (in this answer only); the old one is refused and the board is disconnected', roles: ADMIN },
  { route: 'POST /api/controllers/:id/retire', tag: 'controllers', summary: 'Retire: it can no longer connect; its history stays', roles: ADMIN },
  { route: 'POST /api/controllers/:id/move', tag: 'controllers', summary: 'Move to another site with its zones', roles: ADMIN, body: moveControllerSchema },
  { route: 'GET /api/controllers/:id/relays', tag: 'controllers', summary: 'Each relay and what it is wired to' },
  { route: 'PUT /api/controllers/:id/relays', tag: 'controllers', summary: 'Re-wire the board’s zones to relays in one go', roles: ADMIN_MANAGER, body: relayMapSchema },
  { route: 'GET /api/controllers/:id/readings', tag: 'history', summary: 'A controller’s sensor readings', query: readingsQuerySchema },
  { route: 'GET /api/controllers/:id/service-records', tag: 'service', summary: 'Notes on a controller, newest first' },
  { route: 'POST /api/controllers/:id/service-records', tag: 'service', summary: 'A note on a controller, with up to 5 photos', roles: STAFF, body: serviceRecordSchema, files: { photos: { description: 'Images (PNG, JPEG, WebP), at most 5 MB each, at most 5', many: true } }, status: 201 },
  // zones
  { route: 'GET /api/zones', tag: 'zones', summary: 'Zones one may see', note: 'Query: siteId (optional)' },
  { route: 'POST /api/zones', tag: 'zones', summary: 'Add a zone', roles: ADMIN_MANAGER, body: createZoneSchema, status: 201 },
  { route: 'GET /api/zones/:id', tag: 'zones', summary: 'A zone' },
  { route: 'PATCH /api/zones/:id', tag: 'zones', summary: 'Change a zone (technicians: head count, flow, notes, name)', roles: STAFF, body: updateZoneSchema },
  { route: 'DELETE /api/zones/:id', tag: 'zones', summary: 'Remove a zone', roles: ADMIN_MANAGER, status: 204, produces: 'none' },
  { route: 'GET /api/zones/template.csv', tag: 'zones', summary: 'Zones CSV template', produces: 'csv' },
  { route: 'GET /api/sites/:id/zones.csv', tag: 'zones', summary: 'A site’s zones as CSV (the template’s columns)', produces: 'csv' },
  { route: 'POST /api/sites/:id/zones/import', tag: 'zones', summary: 'Import zones from CSV: preview with dryRun=1; saves all rows or none', roles: ADMIN_MANAGER, query: zoneImportQuery, files: { file: { description: 'CSV, UTF-8, at most 1 MB' } } },
  { route: 'GET /api/zones/:id/service-records', tag: 'service', summary: 'Walk results and notes on a zone, with photos, newest first' },
  { route: 'POST /api/zones/:id/service-records', tag: 'service', summary: 'A note on a zone, with up to 5 photos', roles: STAFF, body: serviceRecordSchema, files: { photos: { description: 'Images (PNG, JPEG, WebP), at most 5 MB each, at most 5', many: true } }, status: 201 },
  { route: 'GET /api/service-records/:id/photos/:n', tag: 'service', summary: 'A service record’s photo', produces: 'image' },
  // valves and schedules
  { route: 'POST /api/zones/:id/start', tag: 'valves', summary: 'Open a zone for some minutes', roles: STAFF, status: 202, note: 'Body: { minutes: integer 1..MANUAL_MAX_MINUTES, overrideHold?: boolean } (schema in server/routes/control.ts)' },
  { route: 'POST /api/zones/:id/stop', tag: 'valves', summary: 'Close a zone', roles: STAFF, status: 202 },
  { route: 'POST /api/sites/:id/stop', tag: 'valves', summary: 'Close every valve of a site', roles: STAFF, status: 202 },
  { route: 'GET /api/sites/:id/activity', tag: 'valves', summary: 'What runs and waits at a site' },
  { route: 'GET /api/sites/:id/programs', tag: 'schedules', summary: 'A site’s programs' },
  { route: 'POST /api/sites/:id/programs', tag: 'schedules', summary: 'Add a program', roles: ADMIN_MANAGER, body: createProgramSchema, status: 201 },
  { route: 'GET /api/programs/:id', tag: 'schedules', summary: 'A program' },
  { route: 'PATCH /api/programs/:id', tag: 'schedules', summary: 'Change a program', roles: ADMIN_MANAGER, body: updateProgramSchema },
  { route: 'DELETE /api/programs/:id', tag: 'schedules', summary: 'Remove a program', roles: ADMIN_MANAGER, status: 204, produces: 'none' },
  { route: 'GET /api/sites/:id/timeline', tag: 'schedules', summary: 'Planned runs for the coming days', note: 'Query: days 1..14 (default 7)' },
  { route: 'GET /api/sites/:id/runs', tag: 'schedules', summary: 'Runs in a window', note: 'Query: from, to (ISO date-times; default ±24 h)' },
  { route: 'GET /api/sites/:id/hold', tag: 'schedules', summary: 'The current rain hold, if any' },
  { route: 'POST /api/sites/:id/rain-delay', tag: 'schedules', summary: 'Start a rain delay', roles: 'admin, manager, owner', body: rainDelaySchema, status: 201 },
  { route: 'DELETE /api/sites/:id/rain-delay', tag: 'schedules', summary: 'End the rain delay', roles: 'admin, manager, owner' },
  { route: 'POST /api/sites/:id/walks', tag: 'valves', summary: 'Start a walk test, zone by zone', roles: STAFF, body: walkSchema, status: 201 },
  { route: 'GET /api/walks/:id', tag: 'valves', summary: 'A walk test’s state' },
  { route: 'POST /api/walks/:id/step', tag: 'valves', summary: 'Next, back, extend or stop a walk', roles: STAFF, body: walkStepSchema },
  // water and weather
  { route: 'GET /api/weather/template.csv', tag: 'weather', summary: 'Weather CSV template', produces: 'csv' },
  { route: 'GET /api/sites/:id/weather', tag: 'weather', summary: 'Daily weather and ET₀', query: weatherRangeQuery },
  { route: 'PUT /api/sites/:id/weather/:date', tag: 'weather', summary: 'Type in a day', roles: STAFF, body: weatherDayInputSchema },
  { route: 'DELETE /api/sites/:id/weather/:date', tag: 'weather', summary: 'Remove a day', roles: STAFF, status: 204, produces: 'none' },
  { route: 'POST /api/sites/:id/weather/import', tag: 'weather', summary: 'Import weather CSV (dryRun=1 previews)', roles: STAFF, query: importQuery, files: { file: { description: 'CSV, at most 5 MB' } } },
  { route: 'POST /api/sites/:id/weather/fetch', tag: 'weather', summary: 'Fetch days from the weather service', roles: ADMIN_MANAGER, body: weatherFetchSchema },
  { route: 'GET /api/sites/:id/supply-tests', tag: 'supply', summary: 'Bucket and meter tests' },
  { route: 'POST /api/sites/:id/supply-tests', tag: 'supply', summary: 'Record a bucket or meter test', roles: STAFF, body: supplyTestInputSchema, status: 201 },
  { route: 'GET /api/sites/:id/planning', tag: 'supply', summary: 'Zone hydraulics and pipe losses', query: planningQuery },
  { route: 'GET /api/sites/:id/watering-need', tag: 'supply', summary: 'ET₀, rain and minutes needed per zone', query: wateringNeedQuery },
  { route: 'POST /api/planning/group-heads', tag: 'supply', summary: 'Group heads into zones within the supply', body: groupHeadsSchema },
  // history and alerts
  { route: 'GET /api/history/zone-runs', tag: 'history', summary: 'Zone runs, filtered and paged', query: runHistoryQuerySchema },
  { route: 'GET /api/history/zone-runs.csv', tag: 'history', summary: 'Zone runs as CSV', query: runHistoryFilterSchema, produces: 'csv' },
  { route: 'GET /api/history/water-use', tag: 'history', summary: 'Water use by day, week or month', query: waterUseQuerySchema },
  { route: 'GET /api/sites/:id/review', tag: 'history', summary: 'A site’s review: what ran, what was skipped and why', query: reviewQuerySchema },
  { route: 'GET /api/alerts', tag: 'alerts', summary: 'Alerts one may see', query: alertListQuerySchema },
  { route: 'GET /api/alerts/:id', tag: 'alerts', summary: 'An alert' },
  { route: 'POST /api/alerts/:id/acknowledge', tag: 'alerts', summary: 'Acknowledge an alert', roles: STAFF },
  // integrations
  { route: 'GET /api/tokens', tag: 'integrations', summary: 'API tokens (prefix, role, sites, last used)', roles: ADMIN },
  { route: 'POST /api/tokens', tag: 'integrations', summary: 'Create an API token (shown in this answer only)', roles: ADMIN, body: createTokenSchema, status: 201 },
  { route: 'DELETE /api/tokens/:id', tag: 'integrations', summary: 'Revoke an API token', roles: ADMIN, status: 204, produces: 'none' },
  { route: 'GET /api/webhooks', tag: 'integrations', summary: 'Webhooks', roles: ADMIN },
  { route: 'POST /api/webhooks', tag: 'integrations', summary: 'Add a webhook (signing secret in this answer only)', roles: ADMIN, body: createWebhookSchema, status: 201 },
  { route: 'GET /api/webhooks/:id', tag: 'integrations', summary: 'A webhook', roles: ADMIN },
  { route: 'PATCH /api/webhooks/:id', tag: 'integrations', summary: 'Change a webhook or rotate its secret', roles: ADMIN, body: updateWebhookSchema },
  { route: 'DELETE /api/webhooks/:id', tag: 'integrations', summary: 'Remove a webhook and its delivery log', roles: ADMIN, status: 204, produces: 'none' },
  { route: 'GET /api/webhooks/:id/deliveries', tag: 'integrations', summary: 'A webhook’s delivery log, newest first', roles: ADMIN, query: deliveriesQuerySchema },
  // demo mode only
  { route: 'GET /api/mail/outbox', tag: 'demo', summary: 'Mail caught by the local fake SMTP server (demo mode)', roles: ADMIN, note: 'Query: to, limit' },
  { route: 'GET /api/demo/simulator/controllers', tag: 'demo', summary: 'Simulated boards (demo mode)' },
  { route: 'POST /api/demo/simulator/controllers/:serial/rain', tag: 'demo', summary: 'Trip or clear a simulated rain sensor (demo mode)', note: 'Body: { tripped: boolean }' },
  { route: 'POST /api/demo/simulator/controllers/:serial/faults', tag: 'demo', summary: 'Inject faults into a simulated board (demo mode)', note: 'Body: see server/routes/demo.ts' },
];

const jsonSchema = (s: z.ZodType) => {
  const { $schema: _drop, ...rest } = z.toJSONSchema(s, { io: 'input', unrepresentable: 'any' }) as Record<string, unknown>;
  return rest;
};

const CONTENT: Record<Exclude<Produces, 'none'>, Record<string, object>> = {
  json: { 'application/json': {} },
  csv: { 'text/csv': { schema: { type: 'string' } } },
  html: { 'text/html': { schema: { type: 'string' } } },
  image: { 'image/png': { schema: { type: 'string', format: 'binary' } }, 'image/jpeg': { schema: { type: 'string', format: 'binary' } }, 'image/webp': { schema: { type: 'string', format: 'binary' } } },
};

function operation(op: Op) {
  const [, path] = op.route.split(' ');
  const parameters: object[] = [...path.matchAll(/:([A-Za-z]+)/g)].map((m) => ({
    name: m[1], in: 'path', required: true, schema: m[1] === 'serial' || m[1] === 'date' ? { type: 'string' } : { type: 'integer', minimum: 1 },
  }));
  if (op.query) {
    const q = jsonSchema(op.query) as { properties?: Record<string, object>; required?: string[] };
    for (const [name, schema] of Object.entries(q.properties ?? {})) parameters.push({ name, in: 'query', required: q.required?.includes(name) ?? false, schema });
  }
  const out: Record<string, unknown> = {
    tags: [op.tag],
    summary: op.summary,
    description: [op.roles ? `Roles: ${op.roles}.` : op.open ? 'No sign-in needed.' : `Roles: ${ALL}.`, op.note].filter(Boolean).join(' '),
    operationId: op.route.replace(/[^A-Za-z0-9]+/g, '_').replace(/_$/, ''),
    parameters,
    responses: {
      [String(op.status ?? 200)]: { description: 'Done', ...(op.produces === 'none' ? {} : { content: CONTENT[op.produces ?? 'json'] }) },
      default: { description: 'An error', content: { 'application/json': { schema: { $ref: '#/components/schemas/Error' } } } },
    },
    ...(op.open ? { security: [] } : {}),
  };
  if (op.files) {
    const fields = op.body ? (jsonSchema(op.body) as { properties?: Record<string, object>; required?: string[] }) : { properties: {}, required: [] };
    const files = Object.fromEntries(Object.entries(op.files).map(([name, f]) => [name, f.many
      ? { type: 'array', items: { type: 'string', format: 'binary' }, description: f.description }
      : { type: 'string', format: 'binary', description: f.description }]));
    const multipart = { schema: { type: 'object', properties: { ...fields.properties, ...files }, required: [...(fields.required ?? []), ...Object.keys(op.files).filter((k) => !op.files![k].many)] } };
    out.requestBody = { required: true, content: { 'multipart/form-data': multipart, ...(op.body ? { 'application/json': { schema: jsonSchema(op.body) } } : {}) } };
  } else if (op.body) {
    out.requestBody = { required: true, content: { 'application/json': { schema: jsonSchema(op.body) } } };
  }
  return out;
}

let cached: object | null = null;

/** The OpenAPI document (built once per process). */
export function openApiDocument(): object {
  if (cached) return cached;
  const paths: Record<string, Record<string, unknown>> = {};
  for (const op of operations) {
    const [method, path] = op.route.split(' ');
    const key = path.replace(/:([A-Za-z]+)/g, '{$1}');
    (paths[key] ??= {})[method.toLowerCase()] = operation(op);
  }
  cached = {
    openapi: '3.1.0',
    info: {
      title: 'Runnel API',
      version: '1',
      description:
        'Irrigation fleet control. Every answer that fails has the shape { error: { code, message, details } }. ' +
        'Sign in for a session cookie, or send an API token as "Authorization: Bearer <token>". ' +
        'Cookie-authenticated writes from another origin are refused (403 csrf).',
    },
    servers: [{ url: '/' }],
    security: [{ session: [] }, { bearer: [] }],
    components: {
      securitySchemes: {
        session: { type: 'apiKey', in: 'cookie', name: 'runnel.sid' },
        bearer: { type: 'http', scheme: 'bearer', description: 'An API token made by an admin (POST /api/tokens)' },
      },
      schemas: {
        Error: {
          type: 'object',
          required: ['error'],
          properties: { error: { type: 'object', required: ['code', 'message', 'details'], properties: { code: { type: 'string' }, message: { type: 'string' }, details: { description: 'null when there is nothing to add; for field problems a list of { path, message }' } } } },
        },
      },
    },
    paths,
  };
  return cached;
}
