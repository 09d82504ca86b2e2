import { describe, expect, it } from 'vitest';
import { Rng, boardSeed, hashSeed, mulberry32 } from '../../../simulator/prng';

const draw = (next: () => number, n: number) => Array.from({ length: n }, next);

describe('seeded randomness', () => {
  it('repeats the same sequence for the same seed', () => {
    expect(draw(mulberry32(42), 50)).toEqual(draw(mulberry32(42), 50));
  });

  it('gives a different sequence for a different seed', () => {
    expect(draw(mulberry32(42), 10)).not.toEqual(draw(mulberry32(43), 10));
  });

  it('stays within [0, 1) and spreads over the whole range', () => {
    const xs = draw(mulberry32(7), 20_000);
    expect(Math.min(...xs)).toBeGreaterThanOrEqual(0);
    expect(Math.max(...xs)).toBeLessThan(1);
    const mean = xs.reduce((a, b) => a + b, 0) / xs.length;
    expect(mean).toBeGreaterThan(0.49);
    expect(mean).toBeLessThan(0.51);
    const lowDecile = xs.filter((x) => x < 0.1).length / xs.length;
    expect(lowDecile).toBeGreaterThan(0.09);
    expect(lowDecile).toBeLessThan(0.11);
  });

  it('seeds each board from the simulation seed and its serial', () => {
    expect(boardSeed(1, 'RLY-0001')).toBe(boardSeed(1, 'RLY-0001'));
    expect(boardSeed(1, 'RLY-0001')).not.toBe(boardSeed(1, 'RLY-0002'));
    expect(boardSeed(1, 'RLY-0001')).not.toBe(boardSeed(2, 'RLY-0001'));
    expect(hashSeed('x')).toBeGreaterThanOrEqual(0);
    expect(Number.isInteger(hashSeed('x'))).toBe(true);
  });

  it('draws normal noise with mean about 0 and the asked-for spread', () => {
    const rng = new Rng(99);
    const xs = Array.from({ length: 20_000 }, () => rng.gauss(2));
    const mean = xs.reduce((a, b) => a + b, 0) / xs.length;
    const sd = Math.sqrt(xs.reduce((a, b) => a + (b - mean) ** 2, 0) / xs.length);
    expect(Math.abs(mean)).toBeLessThan(0.05);
    expect(sd).toBeGreaterThan(1.95);
    expect(sd).toBeLessThan(2.05);
  });

  it('keeps range() inside its bounds', () => {
    const rng = new Rng(5);
    for (let i = 0; i < 1000; i++) {
      const x = rng.range(-85, -40);
      expect(x).toBeGreaterThanOrEqual(-85);
      expect(x).toBeLessThan(-40);
    }
  });
});
