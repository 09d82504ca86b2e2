import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import convertUnits from 'convert-units';
import {
  KPA_PER_PSI,
  LITRES_PER_US_GALLON,
  QUANTITIES,
  UNIT_SYSTEMS,
  convert,
  ft2ToM2,
  ftToM,
  gpmToLpm,
  inToMm,
  inhToMmh,
  kPaToPsi,
  lpmToGpm,
  m2ToFt2,
  mToFt,
  mmToIn,
  mmhToInh,
  psiToKPa,
  toMetric,
  unitOf,
  type Quantity,
  type UnitSystem,
} from '../../../server/domain/units';
import { expectFieldError, expectRelative } from './helpers';

describe('unit definitions', () => {
  it('has 1 US gallon = 231 in³ = 3.785 411 784 L exactly', () => {
    // NIST SP 811 (2008), Appendix B.8
    expect(gpmToLpm(1)).toBe(3.785411784);
    expectRelative(231 * Math.pow(0.254, 3), LITRES_PER_US_GALLON, 1e-12); // 1 in = 0.254 dm
  });

  it('has 1 in = 25.4 mm and 1 ft = 0.3048 m exactly', () => {
    // NIST SP 811 (2008), Appendix B.8
    expect(inToMm(1)).toBe(25.4);
    expect(ftToM(1)).toBe(0.3048);
    expect(ft2ToM2(1)).toBeCloseTo(0.09290304, 12);
    expect(inhToMmh(1)).toBe(25.4);
  });

  it('has 1 psi = 6.894 757 kPa', () => {
    // NIST SP 811 (2008), Appendix B.8 (printed to 7 significant digits)
    expect(psiToKPa(1)).toBeCloseTo(6.894757, 6);
    expect(KPA_PER_PSI).toBeCloseTo(6.894757, 6);
  });

  it('converts everyday values both ways', () => {
    expect(lpmToGpm(30)).toBeCloseTo(7.925, 3);
    expect(mmToIn(25.4)).toBe(1);
    expect(m2ToFt2(1)).toBeCloseTo(10.7639, 4);
    expect(kPaToPsi(300)).toBeCloseTo(43.51, 2);
    expect(mToFt(100)).toBeCloseTo(328.084, 3);
    expect(mmhToInh(40)).toBeCloseTo(1.5748, 4);
  });
});

describe('cross-check with convert-units', () => {
  // convert-units stores its own rounded factors (e.g. psi as 6.89476 kPa), so agreement is
  // checked to 1e-5 relative rather than exactly.
  const pairs: [string, (x: number) => number, string, string][] = [
    ['flow', lpmToGpm, 'l/min', 'gal/min'],
    ['depth', mmToIn, 'mm', 'in'],
    ['area', m2ToFt2, 'm2', 'ft2'],
    ['pressure', kPaToPsi, 'kPa', 'psi'],
    ['length', mToFt, 'm', 'ft'],
  ];
  for (const [name, fn, from, to] of pairs) {
    it(`agrees on ${name} (${from} → ${to})`, () => {
      fc.assert(
        fc.property(fc.double({ min: 0.001, max: 1e6, noNaN: true }), (v) => {
          const theirs = convertUnits(v)
            .from(from as never)
            .to(to as never);
          expectRelative(fn(v), theirs, 1e-5);
        }),
      );
    });
  }
});

describe('convert for display', () => {
  it('leaves metric values alone and labels them', () => {
    expect(convert(12.5, 'flow', 'metric')).toEqual({ value: 12.5, unit: 'L/min' });
    expect(convert(40, 'rate', 'metric')).toEqual({ value: 40, unit: 'mm/h' });
  });

  it('converts to US units with their labels', () => {
    expect(convert(3.785411784, 'flow', 'us')).toEqual({ value: 1, unit: 'gal/min' });
    expect(convert(25.4, 'depth', 'us')).toEqual({ value: 1, unit: 'in' });
    expect(convert(25.4, 'rate', 'us')).toEqual({ value: 1, unit: 'in/h' });
    expect(convert(0.3048, 'length', 'us')).toEqual({ value: 1, unit: 'ft' });
    expect(convert(6.894757, 'pressure', 'us').unit).toBe('psi');
    expect(convert(6.894757, 'pressure', 'us').value).toBeCloseTo(1, 6);
    expect(convert(0.09290304, 'area', 'us').value).toBeCloseTo(1, 12);
    expect(unitOf('area', 'us')).toBe('ft²');
  });

  it('round-trips every quantity through the chosen system', () => {
    fc.assert(
      fc.property(
        fc.double({ min: -1e6, max: 1e6, noNaN: true }),
        fc.constantFrom<Quantity>(...QUANTITIES),
        fc.constantFrom<UnitSystem>(...UNIT_SYSTEMS),
        (v, q, s) => {
          const shown = convert(v, q, s);
          expect(shown.unit).toBe(unitOf(q, s));
          const back = toMetric(shown.value, q, s);
          expect(Math.abs(back - v)).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(v)));
        },
      ),
    );
  });

  it('rejects unknown quantities and systems and non-finite values', () => {
    expectFieldError(() => convert(1, 'volume' as Quantity, 'us'), 'quantity');
    expectFieldError(() => convert(1, 'flow', 'imperial' as UnitSystem), 'system');
    expectFieldError(() => convert(Number.NaN, 'flow', 'us'), 'value');
    expectFieldError(() => lpmToGpm(Number.POSITIVE_INFINITY), 'value');
  });
});
