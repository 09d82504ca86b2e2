import type { RouteLocationRaw } from 'vue-router';
import type { Role } from '../types/api';

export type NavEntry = {
  label: string;
  icon: string;
  to: RouteLocationRaw;
  /** Roles that see the entry; keep in step with the route's meta.roles. */
  roles: readonly Role[];
  /** data-test suffix: nav-<key>. */
  key: string;
  /** Shown only on a demo install. */
  demoOnly?: boolean;
};

const everyone: readonly Role[] = ['admin', 'manager', 'technician', 'owner'];

/**
 * The one list of navigation entries. Add Programs, History, Alerts, Calculator … here when
 * their pages exist; only link to pages that exist.
 */
export const navEntries: readonly NavEntry[] = [
  { key: 'fleet', label: 'Fleet', icon: 'grid_view', to: { name: 'fleet' }, roles: everyone },
  { key: 'history', label: 'Run history', icon: 'history', to: { name: 'history' }, roles: everyone },
  { key: 'alerts', label: 'Alerts', icon: 'notifications', to: { name: 'alerts' }, roles: everyone },
  { key: 'calculator', label: 'Field calculator', icon: 'calculate', to: { name: 'calculator' }, roles: everyone },
  { key: 'audit', label: 'Audit log', icon: 'manage_search', to: { name: 'audit' }, roles: everyone },
  { key: 'people', label: 'People', icon: 'group', to: { name: 'people' }, roles: ['admin'] },
  { key: 'tokens', label: 'API tokens', icon: 'key', to: { name: 'tokens' }, roles: ['admin'] },
  { key: 'webhooks', label: 'Webhooks', icon: 'webhook', to: { name: 'webhooks' }, roles: ['admin'] },
  { key: 'api', label: 'API reference', icon: 'menu_book', to: { name: 'api-docs' }, roles: ['admin', 'manager'] },
  { key: 'simulator', label: 'Simulated boards', icon: 'developer_board', to: { name: 'simulator' }, roles: ['admin'], demoOnly: true },
  { key: 'mail', label: 'Caught mail', icon: 'mark_email_read', to: { name: 'mail-outbox' }, roles: ['admin'], demoOnly: true },
];

export function navFor(role: Role | null, demo = false): NavEntry[] {
  return role ? navEntries.filter((e) => e.roles.includes(role) && (demo || !e.demoOnly)) : [];
}
