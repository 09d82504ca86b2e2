import { expect } from 'vitest';
import { DomainInputError } from '../../../server/domain/errors';

/** |actual − expected| ≤ tol. */
export function expectNear(actual: number, expected: number, tol: number): void {
  expect(Number.isFinite(actual), `expected a finite number, got ${actual}`).toBe(true);
  expect(Math.abs(actual - expected), `${actual} should be within ${tol} of ${expected}`).toBeLessThanOrEqual(tol);
}

/** Relative difference within rel. */
export function expectRelative(actual: number, expected: number, rel: number): void {
  const scale = Math.max(Math.abs(expected), Number.MIN_VALUE);
  expect(Math.abs(actual - expected) / scale, `${actual} should be within ${rel * 100}% of ${expected}`).toBeLessThanOrEqual(rel);
}

/** The call throws a DomainInputError whose `field` is the given one and whose message names it. */
export function expectFieldError(fn: () => unknown, field: string): DomainInputError {
  let caught: unknown;
  try {
    fn();
  } catch (e) {
    caught = e;
  }
  expect(caught, `expected a DomainInputError for ${field}`).toBeInstanceOf(DomainInputError);
  const err = caught as DomainInputError;
  expect(err.field).toBe(field);
  expect(err.message).toContain(field);
  return err;
}
