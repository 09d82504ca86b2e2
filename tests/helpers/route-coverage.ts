import type { Express } from 'express';

/**
 * What the role × route matrices need to prove they try every route: the routes the app
 * mounts, read from Express's own router stack, and the route a matrix row names.
 */
type Layer = { rawPath?: unknown; route?: { path: string; methods: Record<string, boolean> }; handle?: { stack?: Layer[] } };

/** Every API route the app serves, as "METHOD /api/…" with Express's own parameter names. */
export function mountedRoutes(app: Express): string[] {
  const out = new Set<string>();
  const walk = (stack: Layer[], prefix: string) => {
    for (const l of stack) {
      if (l.route) {
        for (const m of Object.keys(l.route.methods)) if (m !== '_all') out.add(`${m.toUpperCase()} ${(prefix + l.route.path).replace(/(.)\/$/, '$1')}`);
      } else if (l.handle?.stack) walk(l.handle.stack, prefix + (typeof l.rawPath === 'string' && l.rawPath !== '/' ? l.rawPath : ''));
    }
  };
  walk((app as unknown as { router: { stack: Layer[] } }).router.stack, '');
  return [...out].filter((r) => r.includes(' /api/')).sort();
}

/**
 * The route a matrix row is about: its label without the note in brackets and without a
 * query, e.g. "GET /api/zones?siteId (other site)" → "GET /api/zones".
 */
export function routeOf(label: string): string {
  const [method, path] = label.replace(/\s*\(.*\)\s*$/, '').split(/\s+/);
  return `${method.toUpperCase()} ${path.split('?')[0]}`;
}

/** Does a request (method, path with query) hit the route a row names? Keeps every label honest. */
export function hitsRoute(label: string, method: string, path: string): boolean {
  const [m, pattern] = routeOf(label).split(' ');
  const re = new RegExp(`^${pattern.replace(/[.*+?^${}()|[\]\\]/g, '\\$&').replace(/:\w+/g, '[^/]+')}$`);
  return m === method.toUpperCase() && re.test(path.split('?')[0]);
}
