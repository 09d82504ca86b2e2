import type { Router } from 'express';
import type { AppDeps } from '../app';
import { authRoutes } from './auth';
import { controllerRoutes } from './controllers';
import { healthRoutes } from './health';
import { planningRoutes } from './planning';
import { siteRoutes } from './sites';
import { supplyRoutes } from './supply';
import { weatherRoutes } from './weather';
import { zoneRoutes } from './zones';
import { siteControlRoutes, zoneControlRoutes } from './control';
import { demoRoutes } from './demo';
import { programRoutes, siteScheduleRoutes } from './programs';
import { walkRoutes } from './walks';
import { historyRoutes } from './history';
import { alertRoutes } from './alerts';
import { mailRoutes } from './mail';
import { userRoutes } from './users';
import { zoneCsvRoutes } from './zone-csv';
import { sitePlanRoutes } from './site-plans';
import { provisioningRoutes } from './provisioning';
import { serviceRecordRoutes } from './service-records';
import { auditRoutes } from './audit';
import { tokenRoutes } from './tokens';
import { webhookRoutes } from './webhooks';
import { openapiRoutes } from './openapi';

/**
 * Every API router and where it is mounted under /api. A new resource is one line here.
 * Routers that need live parts (gateway, dispatcher) get them from deps.
 */
export const apiRouters: { path: string; build: (deps: AppDeps) => Router }[] = [
  { path: '/health', build: healthRoutes },
  { path: '/auth', build: authRoutes },
  // running the firm (issue 7): people, provisioning, plans and imports, audit, integrations
  { path: '/auth', build: (d) => userRoutes(d).account },
  { path: '/users', build: (d) => userRoutes(d).people },
  { path: '/', build: zoneCsvRoutes }, // before /zones/:id, which would read "template.csv" as an id
  { path: '/sites', build: sitePlanRoutes },
  { path: '/sites', build: (d) => provisioningRoutes(d).sites },
  { path: '/controllers', build: (d) => provisioningRoutes(d).controllers },
  { path: '/zones', build: (d) => serviceRecordRoutes(d).zones },
  { path: '/controllers', build: (d) => serviceRecordRoutes(d).controllers },
  { path: '/service-records', build: (d) => serviceRecordRoutes(d).records },
  { path: '/audit', build: auditRoutes },
  { path: '/tokens', build: tokenRoutes },
  { path: '/webhooks', build: webhookRoutes },
  { path: '/openapi.json', build: openapiRoutes },
  { path: '/sites', build: siteRoutes },
  { path: '/controllers', build: controllerRoutes },
  { path: '/zones', build: zoneRoutes },
  { path: '/', build: weatherRoutes },
  { path: '/sites', build: supplyRoutes },
  { path: '/', build: planningRoutes },
  { path: '/zones', build: zoneControlRoutes },
  { path: '/sites', build: siteControlRoutes },
  { path: '/sites', build: siteScheduleRoutes },
  { path: '/programs', build: programRoutes },
  { path: '/sites', build: (d) => walkRoutes(d).sites },
  { path: '/walks', build: (d) => walkRoutes(d).walks },
  { path: '/zones', build: (d) => walkRoutes(d).zoneRecords },
  { path: '/history', build: (d) => historyRoutes(d).history },
  { path: '/controllers', build: (d) => historyRoutes(d).controllers },
  { path: '/sites', build: (d) => historyRoutes(d).sites },
  { path: '/alerts', build: alertRoutes },
  { path: '/me', build: (d) => mailRoutes(d).me },
  { path: '/mail', build: (d) => mailRoutes(d).mail },
  { path: '/demo', build: demoRoutes },
];
