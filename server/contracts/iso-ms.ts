/**
 * Date#toISOString for whole milliseconds, without a Date per call: the text up to the minute is
 * kept from the last call, so a stream of times from the same minute (a board's samples, a batch
 * of them) costs a little string arithmetic each. Same output as toISOString for years 1970–9999;
 * anything else goes to toISOString itself.
 */
let minute = NaN;
let prefix = '';

export function isoFromMs(ms: number): string {
  const t = Math.trunc(ms);
  if (!(t >= 0 && t < 253_402_300_800_000)) return new Date(t).toISOString();
  const m = Math.floor(t / 60_000);
  if (m !== minute) {
    minute = m;
    prefix = new Date(m * 60_000).toISOString().slice(0, 17); // "YYYY-MM-DDTHH:MM:"
  }
  const rest = t - m * 60_000;
  const s = Math.floor(rest / 1000);
  const milli = rest - s * 1000;
  return `${prefix}${s < 10 ? '0' : ''}${s}.${milli < 10 ? '00' : milli < 100 ? '0' : ''}${milli}Z`;
}
