/** Actions the server writes to the audit log, for the filter's suggestions (any other is typed in). */
const actions = [
  'auth.sign_in', 'auth.sign_out', 'auth.password_reset_request', 'auth.password_reset',
  'user.invite', 'user.invite_resend', 'user.invite_revoke', 'user.accept_invite', 'user.update', 'user.disable', 'user.enable', 'user.preferences',
  'api_token.create', 'api_token.revoke', 'webhook.create', 'webhook.update', 'webhook.delete',
  'site.create', 'site.update', 'site.delete', 'site.plan_upload', 'site.plan_markers', 'site.rain_delay', 'site.rain_delay_cancel', 'site.stop_all', 'site.supply_apply',
  'controller.create', 'controller.update', 'controller.delete', 'controller.provision', 'controller.rotate_secret', 'controller.retire', 'controller.move', 'controller.relays',
  'zone.create', 'zone.update', 'zone.delete', 'zone.import',
  'program.create', 'program.update', 'program.delete',
  'valve.start', 'valve.stop', 'valve.open', 'valve.close', 'valve.hold_override',
  'walk.start', 'walk.finish', 'walk.hold_override',
  'supply_test.create', 'service_record.create', 'weather.save', 'weather.delete', 'weather.import', 'weather.fetch',
];

const families = [...new Set(actions.map((a) => a.split('.')[0]))].map((f) => `${f}.*`);

/** Families first ("valve.*" — every valve entry), then the exact actions. */
export const actionSuggestions: string[] = [...families, ...actions];

export const entityTypes = ['user', 'api_token', 'webhook', 'site', 'controller', 'zone', 'program', 'supply_test', 'service_record', 'weather_day', 'alert'];

export type AuditFilters = {
  userId: number | null;
  action: string;
  siteId: number | null;
  entityType: string;
  from: string;
  to: string;
};

export const emptyAuditFilters = (): AuditFilters => ({ userId: null, action: '', siteId: null, entityType: '', from: '', to: '' });

export function auditQuery(f: AuditFilters, page: number, pageSize: number): URLSearchParams {
  const q = new URLSearchParams();
  if (f.userId) q.set('userId', String(f.userId));
  if (f.action.trim()) q.set('action', f.action.trim());
  if (f.siteId) q.set('siteId', String(f.siteId));
  if (f.entityType.trim()) q.set('entityType', f.entityType.trim());
  if (f.from) q.set('from', f.from);
  if (f.to) q.set('to', f.to);
  q.set('page', String(page));
  q.set('pageSize', String(pageSize));
  return q;
}
