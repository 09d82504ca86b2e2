import type { Fixture } from './fixtures';

/**
 * The role × route matrix for the routes that need the live server (valves, schedules, walks,
 * the demo fleet), run by tests/integration/role-matrix-live.test.ts. A module of its own so
 * tests/integration/role-matrix.test.ts can check, without starting the live world, that the
 * two tables together try every route the app mounts.
 */
export type Who = 'admin' | 'manager' | 'technician' | 'owner' | 'stranger';
export type LiveExtra = {
  programA: number;
  programB: number;
  spareProgram: () => Promise<number>;
  /** A walk of the site's zone started by an admin; stopped at once unless `running`. */
  spareWalk: (siteId: number, running: boolean) => Promise<string>;
  /** The serial of a simulated board at the site. */
  serialA: string;
};
export type LiveCase = {
  route: string;
  method: 'get' | 'post' | 'patch' | 'delete';
  path: (f: Fixture, x: LiveExtra) => string | Promise<string>;
  body?: (f: Fixture, x: LiveExtra) => object;
  expect: Record<Who, number>;
};

const all = (n: number, stranger = 401): Record<Who, number> => ({ admin: n, manager: n, technician: n, owner: n, stranger });
const memberOnly = (n: number): Record<Who, number> => ({ admin: n, manager: n, technician: 404, owner: 404, stranger: 401 });
const adminOnly = (n: number): Record<Who, number> => ({ admin: n, manager: 403, technician: 403, owner: 403, stranger: 401 });

const program = (zoneId: number) => ({
  name: 'Matrix program', startTimes: ['05:00'], dayRule: { kind: 'weekdays', weekdays: [1, 3, 5] }, zones: [{ zoneId, minutes: 5 }],
});

export const liveCases: LiveCase[] = [
  { route: 'POST /api/zones/:id/start', method: 'post', path: (f) => `/api/zones/${f.zoneA}/start`, body: () => ({ minutes: 1 }), expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/zones/:id/start (other site)', method: 'post', path: (f) => `/api/zones/${f.zoneB}/start`, body: () => ({ minutes: 1 }), expect: { admin: 202, manager: 202, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/zones/:id/stop', method: 'post', path: (f) => `/api/zones/${f.zoneA}/stop`, expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/stop', method: 'post', path: (f) => `/api/sites/${f.siteA}/stop`, expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/stop (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/stop`, expect: { admin: 202, manager: 202, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/sites/:id/activity', method: 'get', path: (f) => `/api/sites/${f.siteA}/activity`, expect: all(200) },
  { route: 'GET /api/sites/:id/activity (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/activity`, expect: memberOnly(200) },
  { route: 'GET /api/sites/:id/programs', method: 'get', path: (f) => `/api/sites/${f.siteA}/programs`, expect: all(200) },
  { route: 'GET /api/sites/:id/programs (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/programs`, expect: memberOnly(200) },
  { route: 'POST /api/sites/:id/programs', method: 'post', path: (f) => `/api/sites/${f.siteA}/programs`, body: (f) => program(f.zoneA), expect: { admin: 201, manager: 201, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/programs (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/programs`, body: (f) => program(f.zoneB), expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/programs/:id', method: 'get', path: (_f, x) => `/api/programs/${x.programA}`, expect: all(200) },
  { route: 'GET /api/programs/:id (other site)', method: 'get', path: (_f, x) => `/api/programs/${x.programB}`, expect: memberOnly(200) },
  { route: 'PATCH /api/programs/:id', method: 'patch', path: (_f, x) => `/api/programs/${x.programA}`, body: () => ({ name: 'Renamed' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'DELETE /api/programs/:id', method: 'delete', path: (_f, x) => x.spareProgram().then((id) => `/api/programs/${id}`), expect: { admin: 204, manager: 204, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/sites/:id/timeline', method: 'get', path: (f) => `/api/sites/${f.siteA}/timeline`, expect: all(200) },
  { route: 'GET /api/sites/:id/timeline (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/timeline`, expect: memberOnly(200) },
  { route: 'GET /api/sites/:id/runs', method: 'get', path: (f) => `/api/sites/${f.siteA}/runs`, expect: all(200) },
  { route: 'GET /api/sites/:id/hold', method: 'get', path: (f) => `/api/sites/${f.siteA}/hold`, expect: all(200) },
  { route: 'POST /api/sites/:id/rain-delay', method: 'post', path: (f) => `/api/sites/${f.siteA}/rain-delay`, body: () => ({ hours: 1 }), expect: { admin: 201, manager: 201, technician: 403, owner: 201, stranger: 401 } },
  { route: 'POST /api/sites/:id/rain-delay (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/rain-delay`, body: () => ({ hours: 1 }), expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/sites/:id/rain-delay', method: 'delete', path: (f) => `/api/sites/${f.siteA}/rain-delay`, expect: { admin: 200, manager: 200, technician: 403, owner: 200, stranger: 401 } },
  { route: 'DELETE /api/sites/:id/rain-delay (other site)', method: 'delete', path: (f) => `/api/sites/${f.siteB}/rain-delay`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/zones/:id/service-records', method: 'get', path: (f) => `/api/zones/${f.zoneA}/service-records`, expect: all(200) },
  { route: 'GET /api/zones/:id/service-records (other site)', method: 'get', path: (f) => `/api/zones/${f.zoneB}/service-records`, expect: memberOnly(200) },
  { route: 'POST /api/sites/:id/walks', method: 'post', path: (f) => `/api/sites/${f.siteA}/walks`, body: (f) => ({ zoneIds: [f.zoneA], minutes: 1 }), expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'GET /api/walks/:id (member site)', method: 'get', path: (f, x) => x.spareWalk(f.siteA, false).then((id) => `/api/walks/${id}`), expect: all(200) },
  { route: 'GET /api/walks/:id (other site)', method: 'get', path: (f, x) => x.spareWalk(f.siteB, false).then((id) => `/api/walks/${id}`), expect: memberOnly(200) },
  { route: 'POST /api/walks/:id/step (member site)', method: 'post', path: (f, x) => x.spareWalk(f.siteA, true).then((id) => `/api/walks/${id}/step`), body: () => ({ action: 'stop' }), expect: { admin: 200, manager: 200, technician: 200, owner: 403, stranger: 401 } },
  { route: 'POST /api/walks/:id/step (other site)', method: 'post', path: (f, x) => x.spareWalk(f.siteB, true).then((id) => `/api/walks/${id}/step`), body: () => ({ action: 'stop' }), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  // The demo fleet's controls: the live world runs in demo mode with a simulator control API.
  { route: 'GET /api/demo/simulator/controllers', method: 'get', path: () => '/api/demo/simulator/controllers', expect: adminOnly(200) },
  { route: 'POST /api/demo/simulator/controllers/:serial/rain', method: 'post', path: (_f, x) => `/api/demo/simulator/controllers/${x.serialA}/rain`, body: () => ({ tripped: false }), expect: adminOnly(200) },
  { route: 'POST /api/demo/simulator/controllers/:serial/faults', method: 'post', path: (_f, x) => `/api/demo/simulator/controllers/${x.serialA}/faults`, body: () => ({ fault: 'low_voltage', on: false }), expect: adminOnly(200) },
];
