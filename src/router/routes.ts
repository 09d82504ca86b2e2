import type { RouteRecordRaw } from 'vue-router';
import type { Role } from '../types/api';

declare module 'vue-router' {
  interface RouteMeta {
    /** Reachable without signing in. */
    public?: boolean;
    /** Roles that may open the page; every signed-in role when absent. */
    roles?: Role[];
    title?: string;
    /** Only on a demo install (me.demo). */
    demoOnly?: boolean;
  }
}

export const routes: RouteRecordRaw[] = [
  {
    path: '/sign-in',
    name: 'sign-in',
    component: () => import('../pages/SignInPage.vue'),
    meta: { public: true, title: 'Sign in' },
  },
  {
    path: '/forgot-password',
    name: 'forgot-password',
    component: () => import('../pages/ForgotPasswordPage.vue'),
    meta: { public: true, title: 'Forgot your password?' },
  },
  {
    path: '/reset-password',
    name: 'reset-password',
    component: () => import('../pages/ResetPasswordPage.vue'),
    meta: { public: true, title: 'New password' },
  },
  {
    path: '/accept-invite',
    name: 'accept-invite',
    component: () => import('../pages/AcceptInvitePage.vue'),
    meta: { public: true, title: 'Set your password' },
  },
  {
    path: '/',
    component: () => import('../layouts/MainLayout.vue'),
    children: [
      { path: '', name: 'fleet', component: () => import('../pages/FleetPage.vue'), meta: { title: 'Fleet' } },
      {
        path: 'sites/:id(\\d+)',
        name: 'site',
        component: () => import('../pages/SitePage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Site' },
      },
      {
        path: 'demo/simulator',
        name: 'simulator',
        component: () => import('../pages/SimulatorPage.vue'),
        meta: { title: 'Simulated boards', roles: ['admin'], demoOnly: true },
      },
      {
        path: 'demo/mail',
        name: 'mail-outbox',
        component: () => import('../pages/MailOutboxPage.vue'),
        meta: { title: 'Caught mail', roles: ['admin'], demoOnly: true },
      },
      {
        path: 'controllers/:id(\\d+)/readings',
        name: 'controller-readings',
        component: () => import('../pages/SensorHistoryPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Sensor history' },
      },
      {
        path: 'sites/:id(\\d+)/supply',
        name: 'site-supply',
        component: () => import('../pages/SupplyPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Supply' },
      },
      {
        path: 'sites/:id(\\d+)/planning',
        name: 'site-planning',
        component: () => import('../pages/PlanningPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Zone planning' },
      },
      {
        path: 'sites/:id(\\d+)/watering',
        name: 'site-watering',
        component: () => import('../pages/WateringNeedPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Watering need' },
      },
      {
        path: 'sites/:id(\\d+)/programs',
        name: 'site-programs',
        component: () => import('../pages/ProgramsPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Programs' },
      },
      {
        path: 'sites/:id(\\d+)/schedule',
        name: 'site-schedule',
        component: () => import('../pages/SchedulePage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Schedule' },
      },
      {
        path: 'sites/:id(\\d+)/walk',
        name: 'site-walk',
        component: () => import('../pages/WalkPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Walk test', roles: ['technician', 'manager', 'admin'] },
      },
      {
        path: 'sites/:id(\\d+)/water',
        name: 'site-water',
        component: () => import('../pages/WaterUsePage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Water use' },
      },
      {
        path: 'sites/:id(\\d+)/review',
        name: 'site-review',
        component: () => import('../pages/ReviewPage.vue'),
        props: (r) => ({ id: Number(r.params.id) }),
        meta: { title: 'Dry-spell review' },
      },
      { path: 'calculator', name: 'calculator', component: () => import('../pages/CalculatorPage.vue'), meta: { title: 'Field calculator' } },
      { path: 'history', name: 'history', component: () => import('../pages/HistoryPage.vue'), meta: { title: 'Run history' } },
      { path: 'alerts', name: 'alerts', component: () => import('../pages/AlertsPage.vue'), meta: { title: 'Alerts' } },
      { path: 'people', name: 'people', component: () => import('../pages/PeoplePage.vue'), meta: { title: 'People', roles: ['admin'] } },
      { path: 'tokens', name: 'tokens', component: () => import('../pages/TokensPage.vue'), meta: { title: 'API tokens', roles: ['admin'] } },
      { path: 'webhooks', name: 'webhooks', component: () => import('../pages/WebhooksPage.vue'), meta: { title: 'Webhooks', roles: ['admin'] } },
      { path: 'audit', name: 'audit', component: () => import('../pages/AuditPage.vue'), meta: { title: 'Audit log' } },
      { path: 'api-docs', name: 'api-docs', component: () => import('../pages/ApiDocsPage.vue'), meta: { title: 'API reference', roles: ['admin', 'manager'] } },
      // Programs, History, Alerts, Calculator … are added here with their pages (and in layouts/nav.ts).
      { path: ':rest(.*)*', name: 'not-found', component: () => import('../pages/NotFoundPage.vue'), meta: { title: 'Not found' } },
    ],
  },
];
