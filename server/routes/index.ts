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

/**
 * Every API router and where it is mounted under /api. A new resource is one line here.
 * Routers that need live parts (gateway, dispatcher) get them from deps.
 */
export const apiRouters: { path: string; build: (deps: AppDeps) => Router }[] = [
  { path: '/health', build: healthRoutes },
  { path: '/auth', build: authRoutes },
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
  { path: '/demo', build: demoRoutes },
];
