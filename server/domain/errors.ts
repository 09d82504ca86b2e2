/**
 * Errors raised by the pure domain library (server/domain). No I/O, no Node-only APIs:
 * the Vue client imports this module too.
 */

/** Thrown when a computation is given impossible or missing input. `field` names the input. */
export class DomainInputError extends Error {
  readonly field: string;

  constructor(field: string, message: string) {
    super(message);
    this.name = 'DomainInputError';
    this.field = field;
  }
}

export function isDomainInputError(e: unknown): e is DomainInputError {
  return e instanceof DomainInputError;
}

function describe(value: unknown): string {
  if (typeof value === 'number') return Number.isNaN(value) ? 'NaN' : String(value);
  if (value === undefined) return 'nothing';
  if (value === null) return 'null';
  return JSON.stringify(value) ?? String(value);
}

/** A finite number (not NaN, not ±Infinity, of type number). */
export function requireFinite(field: string, value: unknown): number {
  if (typeof value !== 'number' || !Number.isFinite(value)) {
    throw new DomainInputError(field, `${field} must be a finite number (got ${describe(value)})`);
  }
  return value;
}

/** A finite number > 0. */
export function requirePositive(field: string, value: unknown): number {
  const v = requireFinite(field, value);
  if (v <= 0) throw new DomainInputError(field, `${field} must be greater than 0 (got ${v})`);
  return v;
}

/** A finite number >= 0. */
export function requireNonNegative(field: string, value: unknown): number {
  const v = requireFinite(field, value);
  if (v < 0) throw new DomainInputError(field, `${field} must not be negative (got ${v})`);
  return v;
}

/** A finite number within [min, max] (bounds inclusive unless flagged). */
export function requireInRange(
  field: string,
  value: unknown,
  min: number,
  max: number,
  opts: { minExclusive?: boolean; maxExclusive?: boolean; unit?: string } = {},
): number {
  const v = requireFinite(field, value);
  const lowOk = opts.minExclusive ? v > min : v >= min;
  const highOk = opts.maxExclusive ? v < max : v <= max;
  if (!lowOk || !highOk) {
    const lo = opts.minExclusive ? '(' : '[';
    const hi = opts.maxExclusive ? ')' : ']';
    const unit = opts.unit ? ` ${opts.unit}` : '';
    throw new DomainInputError(field, `${field} must be within ${lo}${min}, ${max}${hi}${unit} (got ${v})`);
  }
  return v;
}

/** A whole number >= min. */
export function requireInteger(field: string, value: unknown, min = 0): number {
  const v = requireFinite(field, value);
  if (!Number.isInteger(v) || v < min) {
    throw new DomainInputError(field, `${field} must be a whole number of at least ${min} (got ${v})`);
  }
  return v;
}

/** One of a fixed set of string values. */
export function requireOneOf<T extends string>(field: string, value: unknown, allowed: readonly T[]): T {
  if (typeof value !== 'string' || !(allowed as readonly string[]).includes(value)) {
    throw new DomainInputError(field, `${field} must be one of ${allowed.join(', ')} (got ${describe(value)})`);
  }
  return value as T;
}

/** One factor of a product k · Π xᵢ^pᵢ: the input's name, its value and its power. */
export type ResultFactor = readonly [field: string, value: number, power: number];

/**
 * A computed result that must be a finite number. Finite but extreme inputs can still
 * overflow (1e308 × 60) or divide by a quantity that underflowed to 0. The error names the
 * input that pushes the result furthest — the largest pᵢ · ln|xᵢ| among the factors — or
 * 'result' when no factor is given.
 */
export function requireFiniteResult(value: number, factors: readonly ResultFactor[] = []): number {
  if (Number.isFinite(value)) return value;
  let blamed: ResultFactor | undefined;
  let worst = -Infinity;
  for (const f of factors) {
    const pull = f[2] * Math.log(Math.abs(f[1]));
    if (pull > worst) {
      worst = pull;
      blamed = f;
    }
  }
  if (!blamed) throw new DomainInputError('result', 'result is not a finite number: the inputs are too extreme to compute with');
  const [field, input] = blamed;
  throw new DomainInputError(field, `${field} (${describe(input)}) is too extreme: the result would not be a finite number`);
}
