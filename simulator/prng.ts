/**
 * Seeded randomness. Every board owns one generator, seeded from the simulation seed and its
 * serial, so a board behaves the same in every run with the same seed whatever the fleet size.
 * Nothing in the simulator calls Math.random.
 */

/** FNV-1a over the text, then a final avalanche: a 32-bit seed from any string. */
export function hashSeed(text: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

export function boardSeed(simSeed: number, serial: string): number {
  return hashSeed(`runnel-sim:${simSeed}:${serial}`);
}

/** mulberry32: a tiny 32-bit generator; returns floats in [0, 1). */
export function mulberry32(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export class Rng {
  private readonly next: () => number;

  constructor(seed: number) {
    this.next = mulberry32(seed);
  }

  /** Uniform in [0, 1). */
  float(): number {
    return this.next();
  }

  /** Uniform in [lo, hi). */
  range(lo: number, hi: number): number {
    return lo + (hi - lo) * this.next();
  }

  /** Standard normal (Box–Muller), scaled by sigma. Always draws exactly two numbers. */
  gauss(sigma = 1): number {
    const u = 1 - this.next();
    const v = this.next();
    return sigma * Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
  }
}
