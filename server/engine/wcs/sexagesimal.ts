/**
 * Sexagesimal angles: right ascension in hours (1 h = 15°) as 'hh:mm:ss.sss' and declination in degrees as
 * '±dd:mm:ss.ss', and back.
 *
 * Formatting rounds the angle once, in units of the last printed digit of the seconds, and only then splits it
 * into fields, so that 59.9996 s carries into the next minute (and 23:59:59.9996 into 00:00:00.000) instead of
 * printing an impossible "60.000". The sign of a declination is kept for values that round to zero from below
 * ('-00:00:00.40' for −0.0001111°).
 *
 * Parsing accepts fields separated by ':', blanks, or the letters h/m/s and d/°/'/" (e.g. '12h30m15.2s',
 * "-05d10'03\""), two fields (minutes with a fraction) or three, and refuses minutes or seconds ≥ 60,
 * RA ≥ 24 h and |Dec| > 90°.
 */

/** Right ascension in degrees → 'hh:mm:ss.sss' (3 decimals by default); wraps into [0, 24) h. */
export function formatRa(degrees: number, decimals = 3): string {
  if (!Number.isFinite(degrees)) throw new RangeError(`Right ascension must be finite, got ${degrees}`);
  const hours = (((degrees / 15) % 24) + 24) % 24;
  const [h, m, s] = splitRounded(hours, decimals, 24);
  return `${pad2(h)}:${pad2(m)}:${formatSeconds(s, decimals)}`;
}

/** Declination in degrees → '±dd:mm:ss.ss' (2 decimals by default). */
export function formatDec(degrees: number, decimals = 2): string {
  if (!Number.isFinite(degrees) || Math.abs(degrees) > 90) {
    throw new RangeError(`Declination must lie in [−90°, 90°], got ${degrees}`);
  }
  const sign = degrees < 0 ? '-' : '+';
  const [d, m, s] = splitRounded(Math.abs(degrees), decimals, Infinity);
  return `${sign}${pad2(d)}:${pad2(m)}:${formatSeconds(s, decimals)}`;
}

/**
 * Rounds `value` (hours or degrees) to `decimals` decimals of a second-of-arc/time and splits it into
 * whole units, whole minutes and the remaining seconds (as an integer count of the smallest unit).
 * Integer arithmetic after the single rounding keeps the fields exact.
 */
function splitRounded(value: number, decimals: number, wrap: number): [number, number, number] {
  if (!Number.isInteger(decimals) || decimals < 0 || decimals > 9) {
    throw new RangeError(`decimals must be an integer from 0 to 9, got ${decimals}`);
  }
  const perSecond = 10 ** decimals;
  let ticks = Math.round(value * 3600 * perSecond);
  const perUnit = 3600 * perSecond;
  if (Number.isFinite(wrap)) ticks %= wrap * perUnit;
  const whole = Math.floor(ticks / perUnit);
  ticks -= whole * perUnit;
  const minutes = Math.floor(ticks / (60 * perSecond));
  ticks -= minutes * 60 * perSecond;
  return [whole, minutes, ticks];
}

function pad2(n: number): string {
  return String(n).padStart(2, '0');
}

function formatSeconds(ticks: number, decimals: number): string {
  const perSecond = 10 ** decimals;
  const whole = Math.floor(ticks / perSecond);
  const fraction = ticks - whole * perSecond;
  return decimals === 0 ? pad2(whole) : `${pad2(whole)}.${String(fraction).padStart(decimals, '0')}`;
}

const NUMBER = /^\d+(\.\d*)?$|^\.\d+$/;

/** Splits '12:30:15.2', '12 30 15.2', '12h30m15.2s' or "12d30'15.2\"" into sign and numeric fields. */
function fields(text: string, what: string): { negative: boolean; parts: number[] } {
  let t = text.trim();
  let negative = false;
  if (t.startsWith('-') || t.startsWith('−') || t.startsWith('+')) {
    negative = t[0] !== '+';
    t = t.slice(1).trim();
  }
  const raw = t
    .replace(/[hdms°'"′″]/gi, ' ')
    .trim()
    .split(/[\s:]+/);
  if (raw.length < 2 || raw.length > 3 || raw.some((f) => !NUMBER.test(f))) {
    throw new RangeError(`Cannot read '${text}' as a sexagesimal ${what} (expected e.g. ${example(what)})`);
  }
  // Only the last field may carry a fraction.
  if (raw.slice(0, -1).some((f) => f.includes('.'))) {
    throw new RangeError(
      `Cannot read '${text}': only the last field of a sexagesimal ${what} may have a fraction`,
    );
  }
  const parts = raw.map(Number);
  if ((parts[1] ?? 0) >= 60 || (parts[2] ?? 0) >= 60) {
    throw new RangeError(`Cannot read '${text}': minutes and seconds must be below 60`);
  }
  return { negative, parts };
}

function example(what: string): string {
  return what === 'right ascension' ? "'12:30:15.2'" : "'-05:10:03.1'";
}

function combine(parts: number[]): number {
  return (parts[0] ?? 0) + (parts[1] ?? 0) / 60 + (parts[2] ?? 0) / 3600;
}

/** 'hh:mm:ss.s' (or 'hh:mm.m') → degrees in [0, 360). */
export function parseRa(text: string): number {
  const { negative, parts } = fields(text, 'right ascension');
  const hours = combine(parts);
  if (negative || hours >= 24) throw new RangeError(`Right ascension '${text}' is outside 0–24 h`);
  return hours * 15;
}

/** '±dd:mm:ss.s' (or '±dd:mm.m') → degrees in [−90, 90]. */
export function parseDec(text: string): number {
  const { negative, parts } = fields(text, 'declination');
  const degrees = combine(parts);
  if (degrees > 90) throw new RangeError(`Declination '${text}' is outside −90° to +90°`);
  return negative ? -degrees : degrees;
}
