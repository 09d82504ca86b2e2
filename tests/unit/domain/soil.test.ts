import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  DEPLETION_FRACTION,
  MONTHLY_PLANT_COEFFICIENTS,
  PLANT_TYPES,
  SOIL_TEXTURES,
  adjustedDepletionFraction,
  effectiveRain,
  plantCoefficient,
  readilyAvailableWater,
  soilProperties,
  soilWaterBalance,
  totalAvailableWater,
  wateringNeed,
  type BalanceDay,
  type PlantType,
} from '../../../server/domain/agronomy';
import { runMinutes } from '../../../server/domain/hydraulics';
import { expectFieldError, expectNear } from './helpers';

const mean = (xs: readonly number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;
const months = Array.from({ length: 12 }, (_, i) => i + 1);

describe('total and readily available water', () => {
  it('gives TAW 136 mm and RAW 54 mm for tomato on silt', () => {
    // FAO-56 (Allen et al. 1998), Example 36: Zr 0.8 m, p 0.40, θFC 0.32, θWP 0.15
    const taw = totalAvailableWater({ fieldCapacity: 0.32, wiltingPoint: 0.15 }, 0.8);
    expect(taw).toBeCloseTo(136, 0);
    expect(readilyAvailableWater(taw, 0.4)).toBeCloseTo(54, 0);
  });

  it('gives TAW 72 mm and RAW 29 mm for tomato on loamy sand', () => {
    // FAO-56 (Allen et al. 1998), Example 36: θFC 0.15, θWP 0.06
    const taw = totalAvailableWater({ fieldCapacity: 0.15, wiltingPoint: 0.06 }, 0.8);
    expect(taw).toBeCloseTo(72, 0);
    expect(readilyAvailableWater(taw, 0.4)).toBeCloseTo(29, 0);
    // the same from θFC − θWP and from the loamy-sand texture (Table 19 midpoint 0.09)
    expect(totalAvailableWater(0.09, 0.8)).toBeCloseTo(72, 6);
    expect(totalAvailableWater('loamy_sand', 0.8)).toBeCloseTo(72, 6);
  });

  it('rejects a wilting point at or above field capacity, and non-positive root depth', () => {
    expectFieldError(() => totalAvailableWater({ fieldCapacity: 0.1, wiltingPoint: 0.2 }, 0.5), 'soil.wiltingPoint');
    expectFieldError(() => totalAvailableWater(0.1, 0), 'rootDepthM');
    expectFieldError(() => totalAvailableWater(0.1, -0.3), 'rootDepthM');
    expectFieldError(() => totalAvailableWater(1.5, 0.3), 'soil');
    expectFieldError(() => totalAvailableWater('peat' as 'loam', 0.3), 'soil');
    expectFieldError(() => readilyAvailableWater(50, 0), 'p');
    expectFieldError(() => readilyAvailableWater(50, 1.2), 'p');
    expectFieldError(() => readilyAvailableWater(-1, 0.5), 'tawMm');
  });
});

describe('soil textures', () => {
  it('uses the FAO-56 Table 19 midpoints of θFC − θWP', () => {
    // FAO-56 (Allen et al. 1998), Table 19 (references.md ranges)
    const table19: Record<string, [number, number]> = {
      sand: [0.05, 0.11],
      sandy_loam: [0.11, 0.15],
      loam: [0.13, 0.18],
      silt_loam: [0.13, 0.19],
      clay: [0.12, 0.2],
    };
    for (const [soil, [lo, hi]] of Object.entries(table19)) {
      expect(soilProperties(soil as 'loam').availableWater).toBeCloseTo((lo + hi) / 2, 10);
    }
    // FAO-56 Example 36 loamy sand: 0.15 − 0.06
    expect(soilProperties('loamy_sand').availableWater).toBeCloseTo(0.09, 10);
  });

  it('keeps basic intake rates within the FAO training manual ranges', () => {
    // FAO Training Manual No. 1 (Brouwer et al. 1985), Annex 2
    const manual: Record<string, [number, number]> = {
      sandy_loam: [20, 30],
      loam: [10, 20],
      clay_loam: [5, 10],
      clay: [1, 5],
    };
    for (const [soil, [lo, hi]] of Object.entries(manual)) {
      const ir = soilProperties(soil as 'loam').intakeRateMmH;
      expect(ir).toBeGreaterThanOrEqual(lo);
      expect(ir).toBeLessThanOrEqual(hi);
    }
  });

  it('orders intake rates from sand (fastest) to clay (slowest)', () => {
    // common practice for the textures the sources leave open (sand, loamy sand, silt loam)
    const rates = SOIL_TEXTURES.map((t) => soilProperties(t).intakeRateMmH);
    for (let i = 1; i < rates.length; i++) expect(rates[i]).toBeLessThan(rates[i - 1]);
    expect(soilProperties('sand').intakeRateMmH).toBeGreaterThan(30); // manual: sand > 30 mm/h
  });

  it('says where each value comes from', () => {
    for (const t of SOIL_TEXTURES) {
      const p = soilProperties(t);
      expect(p.availableWaterSource).toMatch(/Table 19|common practice/);
      expect(p.intakeRateSource).toMatch(/Brouwer|common practice/);
      if (p.availableWaterRange) {
        expect(p.availableWater).toBeGreaterThanOrEqual(p.availableWaterRange[0]);
        expect(p.availableWater).toBeLessThanOrEqual(p.availableWaterRange[1]);
      }
    }
  });
});

describe('plant coefficients', () => {
  it('averages the UC landscape annual turf coefficients: 0.80 cool season, 0.60 warm season', () => {
    // Meyer et al. (1985), UC Center for Landscape & Urban Horticulture
    expect(mean(months.map((m) => plantCoefficient('cool_season_turf', m)))).toBeCloseTo(0.8, 6);
    expect(mean(months.map((m) => plantCoefficient('warm_season_turf', m)))).toBeCloseTo(0.6, 6);
  });

  it('never exceeds the FAO-56 mid-season turf Kc', () => {
    // FAO-56 (Allen et al. 1998), Table 12: cool season 0.95, warm season 0.85
    for (const m of months) {
      expect(plantCoefficient('cool_season_turf', m)).toBeLessThanOrEqual(0.95);
      expect(plantCoefficient('warm_season_turf', m)).toBeLessThanOrEqual(0.85);
    }
  });

  it('is higher in July than in January for turf in the north, and the other way round in the south', () => {
    // common practice: seasonal shape of the monthly turf coefficients
    for (const t of ['cool_season_turf', 'warm_season_turf'] as PlantType[]) {
      expect(plantCoefficient(t, 7)).toBeGreaterThan(plantCoefficient(t, 1));
      expect(plantCoefficient(t, 1, -33.9)).toBeGreaterThan(plantCoefficient(t, 7, -33.9));
      for (const m of months) {
        expect(plantCoefficient(t, m, -33.9)).toBe(plantCoefficient(t, ((m + 5) % 12) + 1, 33.9));
      }
    }
  });

  it('keeps shrubs, trees and groundcover in the WUCOLS moderate class', () => {
    // Costello & Jones, WUCOLS (UC Cooperative Extension / California DWR): moderate 0.4–0.6;
    // choosing the moderate class is common practice
    for (const t of ['shrubs', 'trees', 'groundcover'] as PlantType[]) {
      for (const m of months) {
        expect(plantCoefficient(t, m)).toBeGreaterThanOrEqual(0.4);
        expect(plantCoefficient(t, m)).toBeLessThanOrEqual(0.6);
      }
    }
  });

  it('keeps vegetables between the FAO-56 small-vegetable initial and mid-season Kc', () => {
    // FAO-56 Table 12, small vegetables: Kc ini 0.70, Kc mid 1.05
    const kcs = months.map((m) => plantCoefficient('vegetables', m));
    expect(Math.min(...kcs)).toBeCloseTo(0.7, 10);
    expect(Math.max(...kcs)).toBeCloseTo(1.05, 10);
  });

  it('has twelve positive values for every plant type', () => {
    for (const t of PLANT_TYPES) {
      expect(MONTHLY_PLANT_COEFFICIENTS[t]).toHaveLength(12);
      expect(MONTHLY_PLANT_COEFFICIENTS[t].every((k) => k > 0 && k <= 1.2)).toBe(true);
    }
  });

  it('rejects unknown plant types and months outside 1…12', () => {
    expectFieldError(() => plantCoefficient('cactus' as PlantType, 5), 'plantType');
    expectFieldError(() => plantCoefficient('shrubs', 0), 'month');
    expectFieldError(() => plantCoefficient('shrubs', 13), 'month');
    expectFieldError(() => plantCoefficient('shrubs', 5, 100), 'latitudeDeg');
  });
});

describe('depletion fraction p', () => {
  it('uses the FAO-56 Table 22 values for turf', () => {
    // FAO-56 (Allen et al. 1998), Table 22: cool season turf 0.40, warm season 0.50
    expect(DEPLETION_FRACTION.cool_season_turf).toBe(0.4);
    expect(DEPLETION_FRACTION.warm_season_turf).toBe(0.5);
  });

  it('adjusts p by 0.04 (5 − ETc) within 0.1…0.8', () => {
    // FAO-56 Table 22 footnote: p = p_table + 0.04 (5 − ETc)
    expect(adjustedDepletionFraction(0.4, 5)).toBeCloseTo(0.4, 10);
    expect(adjustedDepletionFraction(0.4, 8)).toBeCloseTo(0.28, 10);
    expect(adjustedDepletionFraction(0.5, 2)).toBeCloseTo(0.62, 10);
    expect(adjustedDepletionFraction(0.7, 0)).toBe(0.8);
    expect(adjustedDepletionFraction(0.2, 15)).toBe(0.1);
    fc.assert(
      fc.property(fc.double({ min: 0.05, max: 0.95, noNaN: true }), fc.double({ min: 0, max: 20, noNaN: true }), (p, etc) => {
        const q = adjustedDepletionFraction(p, etc);
        expect(q).toBeGreaterThanOrEqual(0.1);
        expect(q).toBeLessThanOrEqual(0.8);
      }),
    );
  });
});

describe('effective rain', () => {
  it('ignores light rain and counts 80 % of the rest', () => {
    // common practice rule (docs/computations.md): threshold 3 mm, fraction 0.8
    expect(effectiveRain(0)).toBe(0);
    expect(effectiveRain(2.9)).toBe(0);
    expect(effectiveRain(3)).toBe(0);
    expect(effectiveRain(13)).toBeCloseTo(8, 10);
    expect(effectiveRain(13, { thresholdMm: 0, fraction: 1 })).toBe(13);
  });

  it('never counts more than fell and never decreases with more rain', () => {
    fc.assert(
      fc.property(fc.double({ min: 0, max: 200, noNaN: true }), fc.double({ min: 0, max: 50, noNaN: true }), (r, extra) => {
        const e = effectiveRain(r);
        expect(e).toBeGreaterThanOrEqual(0);
        expect(e).toBeLessThanOrEqual(r);
        expect(effectiveRain(r + extra)).toBeGreaterThanOrEqual(e);
      }),
    );
  });

  it('rejects negative rain and a fraction above 1', () => {
    expectFieldError(() => effectiveRain(-1), 'rainMm');
    expectFieldError(() => effectiveRain(10, { fraction: 1.5 }), 'fraction');
    expectFieldError(() => effectiveRain(10, { thresholdMm: -2 }), 'thresholdMm');
  });
});

describe('daily soil-water balance', () => {
  // Cool-season turf on loam, 0.3 m roots, July: Kc 0.85 (common practice monthly value),
  // TAW = 1000 × 0.155 × 0.3 = 46.5 mm (FAO-56 Eq. 82, Table 19 midpoint)
  const zone = { plantType: 'cool_season_turf' as const, soil: 'loam' as const, rootDepthM: 0.3, month: 7 };
  const dry = (n: number, et0 = 5): BalanceDay[] => Array.from({ length: n }, () => ({ et0Mm: et0, rainMm: 0, irrigationMm: 0 }));

  it('depletes by ETc = Kc × ET₀ each dry day and asks for water once RAW is used', () => {
    const out = soilWaterBalance(dry(6), zone);
    const kc = plantCoefficient('cool_season_turf', 7);
    const etc = kc * 5;
    out.forEach((d, i) => {
      expectNear(d.etcMm, etc, 1e-12);
      expectNear(d.depletionMm, etc * (i + 1), 1e-9);
      expectNear(d.tawMm, 46.5, 1e-9);
    });
    // FAO-56 Table 22: p = 0.40 + 0.04 (5 − ETc); RAW = p · TAW (Eq. 83)
    const raw = (0.4 + 0.04 * (5 - etc)) * 46.5;
    expectNear(out[0].rawMm, raw, 1e-9);
    const firstDry = out.findIndex((d) => d.needsWater);
    expect(firstDry).toBe(Math.ceil(raw / etc) - 1);
    expect(out.slice(0, firstDry).every((d) => !d.needsWater)).toBe(true);
  });

  it('refills with effective rain and irrigation and drains the surplus as deep percolation', () => {
    const days: BalanceDay[] = [
      { et0Mm: 5, rainMm: 0, irrigationMm: 0 },
      { et0Mm: 5, rainMm: 0, irrigationMm: 0 },
      { et0Mm: 2, rainMm: 23, irrigationMm: 0 }, // effective 0.8 × (23 − 3) = 16 mm
      { et0Mm: 5, rainMm: 0, irrigationMm: 20 },
    ];
    const out = soilWaterBalance(days, zone);
    const kc = plantCoefficient('cool_season_turf', 7);
    expectNear(out[2].effectiveRainMm, 16, 1e-9);
    // day 3: 2 × 5kc + 2kc − 16 → below 0 means field capacity plus percolation
    const d3 = 12 * kc - 16;
    expect(d3).toBeLessThan(0);
    expectNear(out[2].depletionMm, 0, 1e-12);
    expectNear(out[2].deepPercolationMm, -d3, 1e-9);
    expectNear(out[3].deepPercolationMm, 20 - 5 * kc, 1e-9);
    expect(out[3].depletionMm).toBe(0);
  });

  it('never depletes below wilting point (depletion capped at TAW)', () => {
    const out = soilWaterBalance(dry(40, 7), zone);
    expect(out[out.length - 1].depletionMm).toBeCloseTo(46.5, 9);
    expect(out.every((d) => d.depletionMm <= d.tawMm)).toBe(true);
  });

  it('takes the month per day when given, and the hemisphere from the latitude', () => {
    const out = soilWaterBalance(
      [
        { et0Mm: 4, rainMm: 0, irrigationMm: 0, month: 1 },
        { et0Mm: 4, rainMm: 0, irrigationMm: 0, month: 7 },
      ],
      { ...zone, month: undefined, latitudeDeg: -34 },
    );
    expect(out[0].kc).toBe(plantCoefficient('cool_season_turf', 7));
    expect(out[1].kc).toBe(plantCoefficient('cool_season_turf', 1));
  });

  it('keeps the water books balanced while the root zone stays below TAW', () => {
    const day = fc.record({
      et0Mm: fc.double({ min: 0, max: 9, noNaN: true }),
      rainMm: fc.double({ min: 0, max: 40, noNaN: true }),
      irrigationMm: fc.double({ min: 0, max: 25, noNaN: true }),
      month: fc.integer({ min: 1, max: 12 }),
    });
    fc.assert(
      fc.property(
        fc.array(day, { minLength: 1, maxLength: 30 }),
        fc.constantFrom(...PLANT_TYPES),
        fc.constantFrom(...SOIL_TEXTURES),
        fc.double({ min: 0, max: 20, noNaN: true }),
        (days, plantType, soil, d0) => {
          const z = { plantType, soil, rootDepthM: 1.5, initialDepletionMm: d0 };
          const out = soilWaterBalance(days, z);
          expect(out).toHaveLength(days.length);
          for (const r of out) {
            expect(r.depletionMm).toBeGreaterThanOrEqual(0);
            expect(r.depletionMm).toBeLessThanOrEqual(r.tawMm);
            expect(r.needsWater).toBe(r.depletionMm >= r.rawMm - 1e-9);
            expect(r.deepPercolationMm).toBeGreaterThanOrEqual(0);
          }
          if (out.every((r) => r.depletionMm < r.tawMm)) {
            // FAO-56 Eq. 85: Dr,end = Dr,0 + ΣETc − ΣPeff − ΣI + ΣDP
            const sum = (f: (r: (typeof out)[number]) => number) => out.reduce((a, r) => a + f(r), 0);
            const expected = d0 + sum((r) => r.etcMm) - sum((r) => r.effectiveRainMm) - sum((r) => r.irrigationMm) + sum((r) => r.deepPercolationMm);
            expectNear(out[out.length - 1].depletionMm, expected, 1e-6);
          }
        },
      ),
    );
  });

  it('rejects a day without a month, negative weather and an initial depletion beyond TAW', () => {
    expectFieldError(() => soilWaterBalance(dry(1), { ...zone, month: undefined }), 'days[0].month');
    expectFieldError(() => soilWaterBalance([{ et0Mm: -1, rainMm: 0, irrigationMm: 0 }], zone), 'days[0].et0Mm');
    expectFieldError(() => soilWaterBalance([{ et0Mm: 1, rainMm: Number.NaN, irrigationMm: 0 }], zone), 'days[0].rainMm');
    expectFieldError(() => soilWaterBalance(dry(1), { ...zone, initialDepletionMm: 60 }), 'zone.initialDepletionMm');
    expectFieldError(() => soilWaterBalance(dry(1), { ...zone, plantType: 'moss' as PlantType }), 'zone.plantType');
  });
});

describe('watering need', () => {
  it('turns a depletion into gross depth, minutes and cycles that add up', () => {
    // 20 mm net on clay with sprays at 40 mm/h and 80 % efficiency
    const need = wateringNeed({ depletionMm: 20, precipitationRateMmH: 40, efficiency: 0.8, soil: 'clay' });
    // FAO-56 Ch. 8: the net depth refills the root zone to field capacity, i.e. the depletion
    expect(need.netDepthMm).toBe(20);
    // definition of application efficiency: gross = net ÷ efficiency = 20 ÷ 0.8 = 25 mm
    expectNear(need.grossDepthMm, 25, 1e-9);
    // definition: minutes = gross depth ÷ rate × 60 = 25 ÷ 40 × 60 = 37.5 min, the same as runMinutes
    expectNear(need.minutes, runMinutes(20, 40, 0.8), 1e-12);
    expectNear(need.minutes, 37.5, 1e-9);
    // definition: the cycles split the run, so they add up to it
    expectNear(need.cycles.reduce((a, b) => a + b, 0), 37.5, 1e-9);
    // cycle limit 60 × 2.5 / (40 − 3) min (common practice rule, docs/computations.md), clay
    // intake 3 mm/h (midpoint of 1–5 mm/h, Brouwer et al. 1985, FAO Training Manual 1, Annex 2)
    expect(need.cycles.length).toBe(Math.ceil(37.5 / ((60 * 2.5) / 37)));
    // common practice rule: more than one cycle means a soak between them
    expect(need.soakMinutes).toBeGreaterThan(0);
  });

  it('runs one cycle on a soil that takes the water as fast as it comes', () => {
    // sandy loam takes in 25 mm/h (midpoint of 20–30 mm/h, Brouwer et al. 1985, FAO Training
    // Manual 1, Annex 2), above 12 mm/h: one cycle, no soak (common practice rule,
    // docs/computations.md); 10 mm ÷ 12 mm/h × 60 = 50 min (definition)
    const need = wateringNeed({ depletionMm: 10, precipitationRateMmH: 12, soil: 'sandy_loam' });
    expect(need.cycles).toEqual([50]);
    expect(need.soakMinutes).toBe(0);
  });

  it('rejects negative depletion and bad efficiency', () => {
    // definition: a depletion cannot be negative; efficiency is a fraction above 0 and at most 1
    expectFieldError(() => wateringNeed({ depletionMm: -1, precipitationRateMmH: 12 }), 'depletionMm');
    expectFieldError(() => wateringNeed({ depletionMm: 5, precipitationRateMmH: 12, efficiency: 0 }), 'efficiency');
  });
});

describe('results too large to compute', () => {
  // definition: the balance and the watering need return finite numbers or refuse, naming the
  // input that pushes the result furthest out of range
  const zone = { plantType: 'cool_season_turf' as PlantType, soil: 'loam' as const, rootDepthM: 0.3, month: 7 };

  it('refuses a day whose plant demand or water books would overflow', () => {
    expectFieldError(() => soilWaterBalance([{ et0Mm: Number.MAX_VALUE, rainMm: 0, irrigationMm: 0 }], { ...zone, plantCoefficient: 2 }), 'days[0].et0Mm');
    expectFieldError(() => soilWaterBalance([{ et0Mm: 0, rainMm: 1e308, irrigationMm: 1.7e308 }], zone), 'days[0].irrigationMm');
    // large but representable water simply drains below the root zone
    const [day] = soilWaterBalance([{ et0Mm: 0, rainMm: 0, irrigationMm: 1e300 }], zone);
    expect(day.depletionMm).toBe(0);
    expect(day.deepPercolationMm).toBe(1e300);
  });

  it('refuses a watering need whose minutes would be infinite, naming the depletion', () => {
    expectFieldError(() => wateringNeed({ depletionMm: 1e308, precipitationRateMmH: 1e-300 }), 'depletionMm');
    expectFieldError(() => wateringNeed({ depletionMm: 10, precipitationRateMmH: 1e-320 }), 'precipitationRateMmH');
  });
});
