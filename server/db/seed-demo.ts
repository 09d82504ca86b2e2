import { eq, sql } from 'drizzle-orm';
import type { Db } from './client';
import { controllers, siteMembers, sites, users, zones, type NewZone, type WateringRestrictions } from './schema/index';
import { hashPassword } from '../services/auth';
import { programCrons, type DayRule } from '../scheduler/calendar';
import { programZones, programs } from './schema/index';
import { seedDemoWeather } from './seed-weather';

/**
 * The demo scenario. Everything here is invented: Fernhollow Grounds Care looks after four
 * properties in two timezones. Hydraulics are plausible for the head types (sprays about
 * 4–8 L/min a head, rotors 8–15 L/min, drip emitters a few litres an hour). Every site is
 * well inland (Denver, Lakewood, Naperville, Sacramento), so none is marked coastal.
 */
export const DEMO_PASSWORD = 'runnel-demo';
export const DEMO_FIRM = 'Fernhollow Grounds Care';

type ZoneSeed = Omit<NewZone, 'controllerId'>;
type ControllerSeed = {
  serial: string;
  name: string;
  relayCount: number;
  staggerMs: number;
  maxConcurrentValves: number;
  masterValveRelay?: number | null;
  hasFlowSensor: boolean;
  zones: ZoneSeed[];
};
type SiteSeed = {
  key: string;
  name: string;
  address: string;
  timezone: string;
  latitude: number;
  longitude: number;
  elevationM: number;
  supplyFlowLpm: number;
  staticPressureKPa: number;
  supplyMarginPct: number;
  restrictions: WateringRestrictions;
  allowParallel?: boolean;
  controllers: ControllerSeed[];
  programs?: ProgramSeed[];
};
type ProgramSeed = {
  name: string;
  startTimes: string[];
  dayRule: DayRule;
  mode: 'fixed' | 'seasonal' | 'weather';
  seasonalPct?: number;
  /** zone name → minutes */
  zones: [string, number][];
};

const z = (
  relay: number,
  name: string,
  plantType: ZoneSeed['plantType'],
  soilTexture: ZoneSeed['soilTexture'],
  headType: ZoneSeed['headType'],
  headCount: number,
  flowPerHeadLpm: number,
  areaM2: number,
  rootDepthM: number,
  efficiency: number,
): ZoneSeed => ({ relay, name, plantType, soilTexture, headType, headCount, flowPerHeadLpm, areaM2, rootDepthM, efficiency });

export const demoSites: SiteSeed[] = [
  {
    key: 'larkspur',
    name: 'Larkspur Court Apartments',
    address: '1400 Larkspur Court, Denver, CO',
    timezone: 'America/Denver',
    latitude: 39.7392,
    longitude: -104.9903,
    elevationM: 1609,
    supplyFlowLpm: 75,
    staticPressureKPa: 414,
    supplyMarginPct: 20,
    restrictions: { dayRule: 'weekdays', weekdays: [1, 3, 5, 6], noWateringWindows: [{ startMinute: 600, endMinute: 1080 }] },
    programs: [
      { name: 'Early lawns', startTimes: ['04:30'], dayRule: { kind: 'weekdays', weekdays: [1, 3, 5, 6] }, mode: 'seasonal', seasonalPct: 90,
        zones: [['Front lawn east', 12], ['Front lawn west', 12], ['Courtyard rotors', 30], ['Dog run', 10], ['C-block lawn', 12]] },
      { name: 'Beds and hedges', startTimes: ['06:00'], dayRule: { kind: 'weekdays', weekdays: [1, 5] }, mode: 'weather',
        zones: [['Pool deck planters', 30], ['Entry shrub beds', 15], ['C-block hedges', 30], ['Parking islands', 10]] },
    ],
    controllers: [
      {
        serial: 'FHG-LC-0101', name: 'Clubhouse board', relayCount: 8, staggerMs: 600, maxConcurrentValves: 2,
        masterValveRelay: 8, hasFlowSensor: true,
        zones: [
          z(1, 'Front lawn east', 'cool_season_turf', 'clay_loam', 'spray', 6, 5.5, 95, 0.15, 0.7),
          z(2, 'Front lawn west', 'cool_season_turf', 'clay_loam', 'spray', 5, 5.5, 80, 0.15, 0.7),
          z(3, 'Pool deck planters', 'shrubs', 'loam', 'drip', 120, 0.065, 40, 0.45, 0.9),
          z(4, 'Courtyard rotors', 'cool_season_turf', 'clay_loam', 'rotor', 4, 11, 420, 0.15, 0.75),
          z(5, 'Entry shrub beds', 'shrubs', 'loam', 'bubbler', 18, 1.9, 60, 0.45, 0.85),
          z(6, 'Dog run', 'cool_season_turf', 'clay_loam', 'spray', 4, 6, 70, 0.15, 0.7),
        ],
      },
      {
        serial: 'FHG-LC-0102', name: 'Building C board', relayCount: 4, staggerMs: 500, maxConcurrentValves: 1,
        hasFlowSensor: false,
        zones: [
          z(1, 'C-block lawn', 'cool_season_turf', 'clay_loam', 'spray', 7, 5.5, 110, 0.15, 0.7),
          z(2, 'C-block hedges', 'shrubs', 'loam', 'drip', 150, 0.065, 55, 0.5, 0.9),
          z(3, 'Parking islands', 'groundcover', 'sandy_loam', 'spray', 5, 4.5, 65, 0.2, 0.65),
        ],
      },
    ],
  },
  {
    key: 'quarry',
    name: 'Quarry Ridge Office Park',
    address: '88 Quarry Ridge Parkway, Lakewood, CO',
    timezone: 'America/Denver',
    latitude: 39.7047,
    longitude: -105.0814,
    elevationM: 1720,
    supplyFlowLpm: 160,
    staticPressureKPa: 483,
    supplyMarginPct: 15,
    restrictions: { dayRule: 'any', weekdays: [], noWateringWindows: [{ startMinute: 420, endMinute: 1140 }] },
    allowParallel: true,
    programs: [
      { name: 'Night turf', startTimes: ['21:30'], dayRule: { kind: 'interval', everyDays: 2, anchorDate: '2026-01-01' }, mode: 'fixed',
        zones: [['North berm rotors', 35], ['Lobby lawn', 12], ['South lawn rotors', 35], ['Picnic lawn', 12], ['East slope', 10]] },
      { name: 'Planters and trees', startTimes: ['04:00'], dayRule: { kind: 'weekdays', weekdays: [0, 2, 4] }, mode: 'weather',
        zones: [['Bioswale plugs', 25], ['Street trees', 40], ['Patio planters', 20], ['Parking medians', 25], ['Loading dock beds', 15]] },
    ],
    controllers: [
      {
        serial: 'FHG-QR-0201', name: 'North lot board', relayCount: 8, staggerMs: 700, maxConcurrentValves: 3,
        masterValveRelay: null, hasFlowSensor: true,
        zones: [
          z(1, 'North berm rotors', 'cool_season_turf', 'clay', 'rotor', 5, 12, 650, 0.15, 0.75),
          z(2, 'Lobby lawn', 'cool_season_turf', 'clay', 'spray', 8, 6, 120, 0.15, 0.7),
          z(3, 'Bioswale plugs', 'groundcover', 'sandy_loam', 'drip', 200, 0.065, 90, 0.3, 0.9),
          z(4, 'Street trees', 'trees', 'loam', 'bubbler', 12, 3.8, 48, 0.9, 0.9),
          z(5, 'Patio planters', 'shrubs', 'loam', 'drip', 90, 0.065, 30, 0.45, 0.9),
          z(6, 'East slope', 'groundcover', 'clay', 'spray', 7, 4.5, 110, 0.2, 0.6),
        ],
      },
      {
        serial: 'FHG-QR-0202', name: 'South lot board', relayCount: 6, staggerMs: 500, maxConcurrentValves: 2,
        hasFlowSensor: false,
        zones: [
          z(1, 'South lawn rotors', 'cool_season_turf', 'clay', 'rotor', 6, 12.5, 780, 0.15, 0.75),
          z(2, 'Parking medians', 'shrubs', 'loam', 'drip', 160, 0.065, 70, 0.45, 0.9),
          z(3, 'Loading dock beds', 'shrubs', 'loam', 'bubbler', 14, 1.9, 40, 0.45, 0.85),
          z(4, 'Picnic lawn', 'cool_season_turf', 'clay', 'spray', 9, 5.8, 140, 0.15, 0.7),
        ],
      },
    ],
  },
  {
    key: 'millbrook',
    name: 'Millbrook School Playing Fields',
    address: '2100 Millbrook Road, Naperville, IL',
    timezone: 'America/Chicago',
    latitude: 41.7508,
    longitude: -88.1535,
    elevationM: 213,
    supplyFlowLpm: 380,
    staticPressureKPa: 517,
    supplyMarginPct: 20,
    restrictions: { dayRule: 'any', weekdays: [], noWateringWindows: [{ startMinute: 420, endMinute: 1200 }] },
    allowParallel: true,
    programs: [
      { name: 'Playing fields', startTimes: ['22:00'], dayRule: { kind: 'weekdays', weekdays: [0, 2, 4, 6] }, mode: 'weather',
        zones: [['Soccer pitch north', 40], ['Soccer pitch south', 40], ['Baseball infield skirt', 30], ['Outfield', 45]] },
      { name: 'Beds and garden', startTimes: ['05:30'], dayRule: { kind: 'interval', everyDays: 2, anchorDate: '2026-01-02' }, mode: 'fixed',
        zones: [['Bleacher beds', 30], ['Garden club plots', 25]] },
    ],
    controllers: [
      {
        serial: 'FHG-MB-0301', name: 'Field house board', relayCount: 8, staggerMs: 800, maxConcurrentValves: 2,
        masterValveRelay: 7, hasFlowSensor: true,
        zones: [
          z(1, 'Soccer pitch north', 'cool_season_turf', 'silt_loam', 'rotor', 8, 18, 2400, 0.15, 0.75),
          z(2, 'Soccer pitch south', 'cool_season_turf', 'silt_loam', 'rotor', 8, 18, 2400, 0.15, 0.75),
          z(3, 'Baseball infield skirt', 'cool_season_turf', 'silt_loam', 'rotor', 6, 15, 1500, 0.15, 0.75),
          z(4, 'Outfield', 'cool_season_turf', 'silt_loam', 'rotor', 8, 19, 3000, 0.15, 0.75),
          z(5, 'Bleacher beds', 'shrubs', 'loam', 'drip', 180, 0.065, 60, 0.45, 0.9),
          z(6, 'Garden club plots', 'vegetables', 'loam', 'drip', 240, 0.065, 50, 0.3, 0.9),
        ],
      },
    ],
  },
  {
    key: 'heron',
    name: 'Heron Lake Homeowners Association',
    address: 'Heron Lake Drive common areas, Sacramento, CA',
    timezone: 'America/Los_Angeles',
    latitude: 38.5816,
    longitude: -121.4944,
    elevationM: 9,
    supplyFlowLpm: 95,
    staticPressureKPa: 448,
    supplyMarginPct: 20,
    restrictions: { dayRule: 'odd', weekdays: [], noWateringWindows: [{ startMinute: 540, endMinute: 1140 }] },
    programs: [
      { name: 'Odd-day turf', startTimes: ['05:00'], dayRule: { kind: 'odd' }, mode: 'seasonal', seasonalPct: 100,
        zones: [['Entry median', 10], ['Lakeside path lawn', 25], ['Pool lawn', 10], ['Tot lot groundcover', 8]] },
      { name: 'Shrubs and oaks', startTimes: ['06:15'], dayRule: { kind: 'odd' }, mode: 'weather',
        zones: [['Mailbox kiosk beds', 25], ['Oak grove', 40], ['Fence line shrubs', 25], ['Clubhouse roses', 15]] },
    ],
    controllers: [
      {
        serial: 'FHG-HL-0401', name: 'Gatehouse board', relayCount: 6, staggerMs: 500, maxConcurrentValves: 2,
        hasFlowSensor: true,
        zones: [
          z(1, 'Entry median', 'warm_season_turf', 'sandy_loam', 'spray', 8, 5, 130, 0.2, 0.7),
          z(2, 'Lakeside path lawn', 'warm_season_turf', 'sandy_loam', 'rotor', 4, 10, 380, 0.2, 0.75),
          z(3, 'Mailbox kiosk beds', 'shrubs', 'sandy_loam', 'drip', 110, 0.065, 35, 0.45, 0.9),
          z(4, 'Oak grove', 'trees', 'loam', 'bubbler', 10, 3.8, 60, 0.9, 0.9),
        ],
      },
      {
        serial: 'FHG-HL-0402', name: 'Pool house board', relayCount: 4, staggerMs: 500, maxConcurrentValves: 1,
        hasFlowSensor: false,
        zones: [
          z(1, 'Pool lawn', 'warm_season_turf', 'sandy_loam', 'spray', 9, 5, 150, 0.2, 0.7),
          z(2, 'Tot lot groundcover', 'groundcover', 'sandy_loam', 'spray', 6, 4.2, 90, 0.2, 0.65),
          z(3, 'Fence line shrubs', 'shrubs', 'sandy_loam', 'drip', 130, 0.065, 45, 0.45, 0.9),
          z(4, 'Clubhouse roses', 'shrubs', 'loam', 'bubbler', 12, 1.9, 30, 0.45, 0.85),
        ],
      },
    ],
  },
];

export const demoUsers = [
  { email: 'admin@runnel.test', name: 'Marguerite Olsen', role: 'admin' as const, sites: [] as string[] },
  { email: 'manager@runnel.test', name: 'Tomas Reyes', role: 'manager' as const, sites: [] as string[] },
  { email: 'tech@runnel.test', name: 'Kiri Anand', role: 'technician' as const, sites: ['larkspur', 'quarry'] },
  { email: 'owner@runnel.test', name: 'Helen Burke', role: 'owner' as const, sites: ['heron'] },
];

export type SeedResult = { siteIds: Record<string, number>; userIds: Record<string, number>; controllerIds: Record<string, number> };

/** Load the demo scenario once. Refuses in production; does nothing when users already exist. */
export async function seedDemo(db: Db, opts: { production?: boolean } = {}): Promise<SeedResult | null> {
  if (opts.production) throw new Error('Demo data is never loaded in production');
  const [{ n }] = await db.select({ n: sql<number>`count(*)::int` }).from(users);
  if (n > 0) return null;
  const hash = await hashPassword(DEMO_PASSWORD);
  return db.transaction(async (tx) => {
    const siteIds: Record<string, number> = {};
    const controllerIds: Record<string, number> = {};
    for (const s of demoSites) {
      const { key, controllers: cs, programs: ps, ...site } = s;
      const [row] = await tx.insert(sites).values(site).returning({ id: sites.id });
      siteIds[key] = row.id;
      for (const c of cs) {
        const { zones: zs, ...ctrl } = c;
        const [crow] = await tx
          .insert(controllers)
          .values({ ...ctrl, masterValveRelay: ctrl.masterValveRelay ?? null, siteId: row.id, firmwareVersion: '1.4.2' })
          .returning({ id: controllers.id });
        controllerIds[c.serial] = crow.id;
        await tx.insert(zones).values(zs.map((zz) => ({ ...zz, controllerId: crow.id })));
      }
      const siteZones = await tx.select({ id: zones.id, name: zones.name }).from(zones).innerJoin(controllers, eq(zones.controllerId, controllers.id)).where(eq(controllers.siteId, row.id));
      for (const p of ps ?? []) {
        const [prow] = await tx
          .insert(programs)
          .values({ siteId: row.id, name: p.name, startTimes: p.startTimes, dayRule: p.dayRule, crons: programCrons({ startTimes: p.startTimes, dayRule: p.dayRule, activeFrom: null, activeTo: null }), mode: p.mode, seasonalPct: p.seasonalPct ?? 100 })
          .returning({ id: programs.id });
        await tx.insert(programZones).values(
          p.zones.map(([name, minutes], i) => {
            const z = siteZones.find((x) => x.name === name);
            if (!z) throw new Error(`demo program ${p.name}: no zone ${name}`);
            return { programId: prow.id, zoneId: z.id, position: i + 1, minutes, cycleSoak: 'auto' as const };
          }),
        );
      }
    }
    const userIds: Record<string, number> = {};
    for (const u of demoUsers) {
      const [row] = await tx
        .insert(users)
        .values({ email: u.email, name: u.name, role: u.role, passwordHash: hash })
        .returning({ id: users.id });
      userIds[u.email] = row.id;
      if (u.sites.length) await tx.insert(siteMembers).values(u.sites.map((k) => ({ siteId: siteIds[k], userId: row.id })));
    }
    await seedDemoWeather(tx, Object.values(siteIds), new Date());
    return { siteIds, userIds, controllerIds };
  });
}
