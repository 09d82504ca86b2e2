import { DomainInputError } from '../../../server/domain/errors';

/** A field of a calculator: the domain input it feeds and the label the user sees. */
export type CalcFields = Record<string, { key: string; label: string }>;

function rangeText(lo: string, a: string, b: string, hi: string): string {
  const low = lo === '(' ? `above ${a}` : `at least ${a}`;
  const high = hi === ')' ? `below ${b}` : `at most ${b}`;
  return lo === '[' && hi === ']' ? `between ${a} and ${b}` : `${low} and ${high}`;
}

/**
 * The domain library's message said with the field's label and without the metric value it
 * was given (the user may have typed US units): "volumeL must be greater than 0 (got -2)" →
 * "Volume must be greater than 0".
 */
export function friendlyMessage(e: DomainInputError, label: string): string {
  let m = e.message.replace(/\s*\(got [^)]*\)\s*$/, '');
  if (m.startsWith(e.field)) m = label + m.slice(e.field.length);
  return m.replace(/must be within ([[(])([^,]+), ([^\])]+)([\])])/, (_s, lo: string, a: string, b: string, hi: string) => `must be ${rangeText(lo, a, b, hi)}`);
}

export type CalcResult<T> = { value: T | null; errors: Record<string, string>; missing: boolean };

/**
 * Run a domain computation on what was typed. Empty fields give no result and no message;
 * an impossible value gives the domain library's message on the field it names.
 */
export function calculate<T>(inputs: Record<string, number | undefined>, fields: CalcFields, run: () => T): CalcResult<T> {
  if (Object.values(inputs).some((v) => v === undefined)) return { value: null, errors: {}, missing: true };
  try {
    return { value: run(), errors: {}, missing: false };
  } catch (e) {
    if (!(e instanceof DomainInputError)) throw e;
    const f = fields[e.field];
    const key = f?.key ?? '_';
    return { value: null, errors: { [key]: friendlyMessage(e, f?.label ?? e.field) }, missing: false };
  }
}
