import type { Controller, Site, Zone } from '../db/schema/index';
import type { Warning } from '../contracts/common';
import { precipitationRate, usableSupply } from '../domain/hydraulics';

export type ZoneView = Omit<Zone, 'createdAt' | 'updatedAt'> & {
  siteId: number;
  flowLpm: number;
  precipitationRateMmH: number;
  warnings: Warning[];
};
export type ControllerView = Omit<Controller, 'secretHash' | 'createdAt' | 'updatedAt'> & { hasSecret: boolean };
export type SiteView = Omit<Site, 'createdAt' | 'updatedAt'> & { usableSupplyLpm: number };

export function siteView(s: Site): SiteView {
  const { createdAt: _c, updatedAt: _u, ...rest } = s;
  return { ...rest, usableSupplyLpm: round(usableSupply(s.supplyFlowLpm, s.supplyMarginPct), 2) };
}

export function controllerView(c: Controller): ControllerView {
  const { secretHash, createdAt: _c, updatedAt: _u, ...rest } = c;
  return { ...rest, hasSecret: !!secretHash };
}

export function zoneView(z: Zone, site: Pick<Site, 'id' | 'supplyFlowLpm' | 'supplyMarginPct'>): ZoneView {
  const { createdAt: _c, updatedAt: _u, ...rest } = z;
  const flowLpm = round(z.headCount * z.flowPerHeadLpm, 2);
  const usable = usableSupply(site.supplyFlowLpm, site.supplyMarginPct);
  const warnings: Warning[] = [];
  if (flowLpm > usable + 1e-9) {
    warnings.push({
      code: 'over_supply',
      message: `${z.name} needs ${flowLpm} L/min but the usable supply is ${round(usable, 1)} L/min`,
    });
  }
  return {
    ...rest,
    siteId: site.id,
    flowLpm,
    precipitationRateMmH: round(precipitationRate(flowLpm, z.areaM2), 2),
    warnings,
  };
}

export function round(v: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(v * f) / f;
}
