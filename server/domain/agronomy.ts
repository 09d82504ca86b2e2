/**
 * Weather, plant and soil-water computations (FAO-56: Allen, Pereira, Raes & Smith 1998,
 * "Crop evapotranspiration", FAO Irrigation and Drainage Paper 56). Pure functions; angles
 * are in degrees at the interface, radians inside. Equation numbers refer to FAO-56.
 * See docs/computations.md. No function returns a non-finite number: inputs too extreme to
 * compute with raise DomainInputError.
 */
import {
  DomainInputError,
  requireFinite,
  requireInRange,
  requireInteger,
  requireFiniteResult,
  requireNonNegative,
  requireOneOf,
  requirePositive,
} from './errors';
import { cycleAndSoak, runMinutes } from './hydraulics';

// ---------------------------------------------------------------------------------------
// Constants

/** Solar constant, MJ m⁻² min⁻¹ (F56 Eq. 21). */
export const SOLAR_CONSTANT = 0.082;
/** Stefan–Boltzmann constant, MJ K⁻⁴ m⁻² day⁻¹ (F56 Eq. 39). */
export const STEFAN_BOLTZMANN = 4.903e-9;
/** Albedo of the grass reference crop (F56 Eq. 38). */
export const REFERENCE_ALBEDO = 0.23;
/** Ångström coefficients recommended where no calibration exists (F56 Eq. 35). */
export const ANGSTROM_A = 0.25;
export const ANGSTROM_B = 0.5;
/** Hargreaves radiation adjustment coefficient (F56 Eq. 50): interior and coastal. */
export const KRS_INTERIOR = 0.16;
export const KRS_COASTAL = 0.19;
/** Default wind speed where none is measured, m/s (F56 Ch. 3, "missing wind speed data"). */
export const DEFAULT_WIND_SPEED_MS = 2;
/** Conversion of MJ m⁻² day⁻¹ to mm/day of evaporation equivalent (F56 Eq. 20). */
export const MJ_TO_MM = 0.408;

const DEG = Math.PI / 180;

// ---------------------------------------------------------------------------------------
// Input checks shared by the weather functions

function checkLatitude(latitudeDeg: unknown, field = 'latitudeDeg'): number {
  return requireInRange(field, latitudeDeg, -90, 90, { unit: '°' });
}

function checkDayOfYear(dayOfYear: unknown, field = 'dayOfYear'): number {
  const j = requireInteger(field, dayOfYear, 1);
  if (j > 366) throw new DomainInputError(field, `${field} must be within [1, 366] (got ${j})`);
  return j;
}

function checkTemperature(field: string, value: unknown): number {
  if (value === undefined || value === null) throw new DomainInputError(field, `${field} is required`);
  return requireInRange(field, value, -90, 60, { unit: '°C' });
}

function checkTemperatures(tmaxC: unknown, tminC: unknown): { tmax: number; tmin: number } {
  const tmax = checkTemperature('tmaxC', tmaxC);
  const tmin = checkTemperature('tminC', tminC);
  if (tmin > tmax) {
    throw new DomainInputError('tminC', `tminC (${tmin} °C) must not be above tmaxC (${tmax} °C)`);
  }
  return { tmax, tmin };
}

function checkElevation(elevationM: unknown): number {
  if (elevationM === undefined || elevationM === null) throw new DomainInputError('elevationM', 'elevationM is required');
  return requireInRange('elevationM', elevationM, -500, 9000, { unit: 'm' });
}

/** Day of year (1…366) of an ISO calendar date such as "2024-07-06". */
export function dayOfYear(isoDate: string): number {
  const m = typeof isoDate === 'string' ? /^(\d{4})-(\d{2})-(\d{2})/.exec(isoDate) : null;
  if (!m) throw new DomainInputError('isoDate', `isoDate must look like YYYY-MM-DD (got ${String(isoDate)})`);
  const [y, mo, d] = [Number(m[1]), Number(m[2]), Number(m[3])];
  const t = Date.UTC(y, mo - 1, d);
  const back = new Date(t);
  if (back.getUTCFullYear() !== y || back.getUTCMonth() !== mo - 1 || back.getUTCDate() !== d) {
    throw new DomainInputError('isoDate', `isoDate is not a calendar date (got ${isoDate})`);
  }
  return Math.round((t - Date.UTC(y, 0, 1)) / 86_400_000) + 1;
}

// ---------------------------------------------------------------------------------------
// Atmospheric parameters (F56 Chapter 3)

/** Atmospheric pressure P, kPa, from elevation z, m (F56 Eq. 7). */
export function atmosphericPressure(elevationM: number): number {
  const z = checkElevation(elevationM);
  return 101.3 * Math.pow((293 - 0.0065 * z) / 293, 5.26);
}

/** Psychrometric constant γ, kPa/°C, from P, kPa (F56 Eq. 8). */
export function psychrometricConstant(pressureKPa: number): number {
  requirePositive('pressureKPa', pressureKPa);
  return 0.665e-3 * pressureKPa;
}

/** Saturation vapour pressure e°(T), kPa (F56 Eq. 11). */
export function saturationVapourPressure(temperatureC: number): number {
  requireInRange('temperatureC', temperatureC, -90, 60, { unit: '°C' });
  return 0.6108 * Math.exp((17.27 * temperatureC) / (temperatureC + 237.3));
}

/** Mean saturation vapour pressure es = (e°(Tmax) + e°(Tmin)) / 2, kPa (F56 Eq. 12). */
export function meanSaturationVapourPressure(tmaxC: number, tminC: number): number {
  const { tmax, tmin } = checkTemperatures(tmaxC, tminC);
  return (saturationVapourPressure(tmax) + saturationVapourPressure(tmin)) / 2;
}

/** Slope of the saturation vapour pressure curve Δ at T, kPa/°C (F56 Eq. 13). */
export function slopeVapourPressureCurve(temperatureC: number): number {
  const e = saturationVapourPressure(temperatureC);
  return (4098 * e) / Math.pow(temperatureC + 237.3, 2);
}

/** Actual vapour pressure ea from RHmax and RHmin, kPa (F56 Eq. 17). */
export function actualVapourPressureFromRh(tminC: number, tmaxC: number, rhMaxPct: number, rhMinPct: number): number {
  const { tmax, tmin } = checkTemperatures(tmaxC, tminC);
  const rhMax = requireInRange('rhMaxPct', rhMaxPct, 0, 100, { unit: '%' });
  const rhMin = requireInRange('rhMinPct', rhMinPct, 0, 100, { unit: '%' });
  if (rhMin > rhMax) throw new DomainInputError('rhMinPct', `rhMinPct (${rhMin} %) must not be above rhMaxPct (${rhMax} %)`);
  return (saturationVapourPressure(tmin) * (rhMax / 100) + saturationVapourPressure(tmax) * (rhMin / 100)) / 2;
}

/** Actual vapour pressure ea from RHmax only, kPa (F56 Eq. 18). */
export function actualVapourPressureFromRhMax(tminC: number, rhMaxPct: number): number {
  const tmin = checkTemperature('tminC', tminC);
  const rhMax = requireInRange('rhMaxPct', rhMaxPct, 0, 100, { unit: '%' });
  return saturationVapourPressure(tmin) * (rhMax / 100);
}

/** Wind speed at 2 m from speed uz measured at height z, m/s (F56 Eq. 47). */
export function windAt2m(windSpeedMs: number, heightM = 2): number {
  const uz = requireNonNegative('windSpeedMs', windSpeedMs);
  const z = requireInRange('windHeightM', heightM, 0.5, 100, { unit: 'm' });
  return requireFiniteResult((uz * 4.87) / Math.log(67.8 * z - 5.42), [['windSpeedMs', uz, 1]]);
}

// ---------------------------------------------------------------------------------------
// Radiation (F56 Chapter 3)

/** Inverse relative distance Earth–Sun dr (F56 Eq. 23). */
export function inverseRelativeDistance(dayOfYear: number): number {
  const j = checkDayOfYear(dayOfYear);
  return 1 + 0.033 * Math.cos(((2 * Math.PI) / 365) * j);
}

/** Solar declination δ, radians (F56 Eq. 24). */
export function solarDeclination(dayOfYear: number): number {
  const j = checkDayOfYear(dayOfYear);
  return 0.409 * Math.sin(((2 * Math.PI) / 365) * j - 1.39);
}

/** Sunset hour angle ωs, radians (F56 Eq. 25); polar day gives π, polar night 0. */
export function sunsetHourAngle(latitudeDeg: number, dayOfYear: number): number {
  const phi = checkLatitude(latitudeDeg) * DEG;
  const delta = solarDeclination(dayOfYear);
  const x = -Math.tan(phi) * Math.tan(delta);
  return Math.acos(Math.min(1, Math.max(-1, x)));
}

/** Extraterrestrial radiation Ra, MJ m⁻² day⁻¹ (F56 Eq. 21). */
export function extraterrestrialRadiation(latitudeDeg: number, dayOfYear: number): number {
  const phi = checkLatitude(latitudeDeg) * DEG;
  checkDayOfYear(dayOfYear);
  const dr = inverseRelativeDistance(dayOfYear);
  const delta = solarDeclination(dayOfYear);
  const ws = sunsetHourAngle(latitudeDeg, dayOfYear);
  const ra =
    ((24 * 60) / Math.PI) *
    SOLAR_CONSTANT *
    dr *
    (ws * Math.sin(phi) * Math.sin(delta) + Math.cos(phi) * Math.cos(delta) * Math.sin(ws));
  return Math.max(0, ra);
}

/** Daylight hours N (F56 Eq. 34). */
export function daylightHours(latitudeDeg: number, dayOfYear: number): number {
  return (24 / Math.PI) * sunsetHourAngle(latitudeDeg, dayOfYear);
}

/** Solar radiation Rs from sunshine hours, Ångström formula, MJ m⁻² day⁻¹ (F56 Eq. 35). */
export function solarRadiationFromSunshine(
  sunshineHours: number,
  daylightHoursN: number,
  raMJ: number,
  a = ANGSTROM_A,
  b = ANGSTROM_B,
): number {
  const n = requireNonNegative('sunshineHours', sunshineHours);
  const bigN = requireInRange('daylightHours', daylightHoursN, 0, 24, { unit: 'h' });
  const ra = requireNonNegative('ra', raMJ);
  if (n > bigN + 0.1) {
    throw new DomainInputError('sunshineHours', `sunshineHours (${n} h) exceeds the day length (${round(bigN, 2)} h)`);
  }
  const ratio = bigN === 0 ? 0 : Math.min(1, n / bigN);
  const rs = (requireFinite('a', a) + requireFinite('b', b) * ratio) * ra;
  return requireFiniteResult(rs, [
    ['ra', ra, 1],
    ['a', a, 1],
    ['b', b, 1],
  ]);
}

/** Solar radiation Rs from the temperature range (Hargreaves), MJ m⁻² day⁻¹ (F56 Eq. 50). */
export function solarRadiationFromTemperature(tmaxC: number, tminC: number, raMJ: number, kRs = KRS_INTERIOR): number {
  const { tmax, tmin } = checkTemperatures(tmaxC, tminC);
  const ra = requireNonNegative('ra', raMJ);
  requireInRange('kRs', kRs, 0.1, 0.3);
  return requireFiniteResult(kRs * Math.sqrt(tmax - tmin) * ra, [['ra', ra, 1]]);
}

/** Clear-sky solar radiation Rso, MJ m⁻² day⁻¹ (F56 Eq. 37). */
export function clearSkySolarRadiation(raMJ: number, elevationM: number): number {
  const ra = requireNonNegative('ra', raMJ);
  const z = checkElevation(elevationM);
  return (0.75 + 2e-5 * z) * ra;
}

/** Net shortwave radiation Rns, MJ m⁻² day⁻¹ (F56 Eq. 38). */
export function netShortwaveRadiation(rsMJ: number, albedo = REFERENCE_ALBEDO): number {
  const rs = requireNonNegative('rs', rsMJ);
  requireInRange('albedo', albedo, 0, 1);
  return (1 - albedo) * rs;
}

/**
 * Net longwave radiation Rnl, MJ m⁻² day⁻¹ (F56 Eq. 39). Rs/Rso is limited to ≤ 1.0 as
 * F56 prescribes; where Rso is 0 (polar night) the ratio is taken as 1.
 */
export function netLongwaveRadiation(tmaxC: number, tminC: number, eaKPa: number, rsMJ: number, rsoMJ: number): number {
  const { tmax, tmin } = checkTemperatures(tmaxC, tminC);
  const ea = requireNonNegative('ea', eaKPa);
  const rs = requireNonNegative('rs', rsMJ);
  const rso = requireNonNegative('rso', rsoMJ);
  const ratio = rso === 0 ? 1 : Math.min(1, rs / rso);
  const tk4 = (Math.pow(tmax + 273.16, 4) + Math.pow(tmin + 273.16, 4)) / 2;
  return STEFAN_BOLTZMANN * tk4 * (0.34 - 0.14 * Math.sqrt(ea)) * (1.35 * ratio - 0.35);
}

/** Net radiation Rn = Rns − Rnl, MJ m⁻² day⁻¹ (F56 Eq. 40). */
export function netRadiation(rnsMJ: number, rnlMJ: number): number {
  const rns = requireFinite('rns', rnsMJ);
  const rnl = requireFinite('rnl', rnlMJ);
  return requireFiniteResult(rns - rnl, [
    ['rns', rns, 1],
    ['rnl', rnl, 1],
  ]);
}

// ---------------------------------------------------------------------------------------
// Reference evapotranspiration

export interface DailyWeather {
  tmaxC: number;
  tminC: number;
  rhMaxPct?: number;
  rhMinPct?: number;
  actualVapourPressureKPa?: number;
  windSpeedMs?: number;
  /** Height of the wind measurement, m (default 2). */
  windHeightM?: number;
  sunshineHours?: number;
  solarRadiationMJ?: number;
  latitudeDeg: number;
  elevationM: number;
  dayOfYear: number;
  /** Soil heat flux G, MJ m⁻² day⁻¹ (default 0, F56 Eq. 42). */
  soilHeatFluxMJ?: number;
  /** Coastal site: kRs 0.19 instead of 0.16 when radiation comes from temperatures. */
  coastal?: boolean;
}

export type HumiditySource = 'vapour_pressure' | 'rh_max_min' | 'rh_max' | 'tmin';
export type RadiationSource = 'measured' | 'sunshine' | 'temperature_range';

export interface Et0Details {
  et0: number;
  tmeanC: number;
  u2: number;
  pressureKPa: number;
  gamma: number;
  delta: number;
  es: number;
  ea: number;
  ra: number;
  daylightHours: number;
  rs: number;
  rso: number;
  rns: number;
  rnl: number;
  rn: number;
  g: number;
  humiditySource: HumiditySource;
  radiationSource: RadiationSource;
  windAssumed: boolean;
}

function present(v: unknown): boolean {
  return v !== undefined && v !== null;
}

/**
 * FAO-56 Penman–Monteith reference evapotranspiration with all intermediates.
 * Missing data follow F56's own procedures: ea = e°(Tmin) (Eq. 48); Rs from the temperature
 * range (Eq. 50); wind 2 m/s. A negative daily result (possible in polar winter) is
 * returned as 0.
 */
export function referenceEt0Details(w: DailyWeather): Et0Details {
  if (w === null || typeof w !== 'object') throw new DomainInputError('weather', 'weather must be an object');
  const { tmax, tmin } = checkTemperatures(w.tmaxC, w.tminC);
  if (!present(w.latitudeDeg)) throw new DomainInputError('latitudeDeg', 'latitudeDeg is required');
  if (!present(w.dayOfYear)) throw new DomainInputError('dayOfYear', 'dayOfYear is required');
  const lat = checkLatitude(w.latitudeDeg);
  const j = checkDayOfYear(w.dayOfYear);
  const z = checkElevation(w.elevationM);
  const g = present(w.soilHeatFluxMJ) ? requireFinite('soilHeatFluxMJ', w.soilHeatFluxMJ) : 0;
  if (present(w.coastal) && typeof w.coastal !== 'boolean') {
    throw new DomainInputError('coastal', 'coastal must be true or false');
  }

  const tmean = (tmax + tmin) / 2; // Eq. 9
  const pressure = atmosphericPressure(z);
  const gamma = psychrometricConstant(pressure);
  const delta = slopeVapourPressureCurve(tmean);
  const eTmax = saturationVapourPressure(tmax);
  const eTmin = saturationVapourPressure(tmin);
  const es = (eTmax + eTmin) / 2;

  // Humidity
  let ea: number;
  let humiditySource: HumiditySource;
  if (present(w.rhMaxPct)) requireInRange('rhMaxPct', w.rhMaxPct, 0, 100, { unit: '%' });
  if (present(w.rhMinPct)) requireInRange('rhMinPct', w.rhMinPct, 0, 100, { unit: '%' });
  if (present(w.actualVapourPressureKPa)) {
    ea = requireNonNegative('actualVapourPressureKPa', w.actualVapourPressureKPa);
    if (ea > eTmax * (1 + 1e-9)) {
      throw new DomainInputError(
        'actualVapourPressureKPa',
        `actualVapourPressureKPa (${ea} kPa) is above saturation at tmaxC (${round(eTmax, 3)} kPa)`,
      );
    }
    humiditySource = 'vapour_pressure';
  } else if (present(w.rhMaxPct) && present(w.rhMinPct)) {
    ea = actualVapourPressureFromRh(tmin, tmax, w.rhMaxPct as number, w.rhMinPct as number);
    humiditySource = 'rh_max_min';
  } else if (present(w.rhMaxPct)) {
    ea = actualVapourPressureFromRhMax(tmin, w.rhMaxPct as number);
    humiditySource = 'rh_max';
  } else {
    ea = eTmin; // Eq. 48
    humiditySource = 'tmin';
  }

  // Wind
  const windAssumed = !present(w.windSpeedMs);
  const windHeight = present(w.windHeightM) ? (w.windHeightM as number) : 2;
  const u2 = windAssumed ? DEFAULT_WIND_SPEED_MS : windAt2m(w.windSpeedMs as number, windHeight);
  if (windAssumed && present(w.windHeightM)) requireInRange('windHeightM', w.windHeightM, 0.5, 100, { unit: 'm' });

  // Radiation
  const ra = extraterrestrialRadiation(lat, j);
  const bigN = daylightHours(lat, j);
  let rs: number;
  let radiationSource: RadiationSource;
  if (present(w.solarRadiationMJ)) {
    rs = requireNonNegative('solarRadiationMJ', w.solarRadiationMJ);
    if (rs > ra * (1 + 1e-9)) {
      throw new DomainInputError(
        'solarRadiationMJ',
        `solarRadiationMJ (${rs} MJ/m²) exceeds the extraterrestrial radiation for that day and latitude (${round(ra, 2)} MJ/m²)`,
      );
    }
    radiationSource = 'measured';
  } else if (present(w.sunshineHours)) {
    rs = solarRadiationFromSunshine(w.sunshineHours as number, bigN, ra);
    radiationSource = 'sunshine';
  } else {
    rs = solarRadiationFromTemperature(tmax, tmin, ra, w.coastal ? KRS_COASTAL : KRS_INTERIOR);
    radiationSource = 'temperature_range';
  }
  const rso = clearSkySolarRadiation(ra, z);
  const rns = netShortwaveRadiation(rs);
  const rnl = netLongwaveRadiation(tmax, tmin, ea, rs, rso);
  const rn = netRadiation(rns, rnl);

  // Eq. 6
  const numerator = 0.408 * delta * (rn - g) + gamma * (900 / (tmean + 273)) * u2 * (es - ea);
  const denominator = delta + gamma * (1 + 0.34 * u2);
  const et0 = Math.max(
    0,
    requireFiniteResult(numerator / denominator, [
      ...(windAssumed ? [] : [['windSpeedMs', w.windSpeedMs as number, 1] as const]),
      ['soilHeatFluxMJ', g, 1],
    ]),
  );

  return {
    et0,
    tmeanC: tmean,
    u2,
    pressureKPa: pressure,
    gamma,
    delta,
    es,
    ea,
    ra,
    daylightHours: bigN,
    rs,
    rso,
    rns,
    rnl,
    rn,
    g,
    humiditySource,
    radiationSource,
    windAssumed,
  };
}

/** FAO-56 Penman–Monteith reference evapotranspiration ET₀, mm/day (F56 Eq. 6). */
export function referenceEt0(w: DailyWeather): number {
  return referenceEt0Details(w).et0;
}

/** Hargreaves reference evapotranspiration, mm/day (F56 Eq. 52). */
export function hargreavesEt0(p: { tmaxC: number; tminC: number; latitudeDeg: number; dayOfYear: number }): number {
  if (p === null || typeof p !== 'object') throw new DomainInputError('weather', 'weather must be an object');
  const { tmax, tmin } = checkTemperatures(p.tmaxC, p.tminC);
  const ra = extraterrestrialRadiation(p.latitudeDeg, p.dayOfYear);
  const tmean = (tmax + tmin) / 2;
  return Math.max(0, requireFiniteResult(0.0023 * (tmean + 17.8) * Math.sqrt(tmax - tmin) * MJ_TO_MM * ra));
}

// ---------------------------------------------------------------------------------------
// Plants

export const PLANT_TYPES = [
  'cool_season_turf',
  'warm_season_turf',
  'shrubs',
  'trees',
  'groundcover',
  'vegetables',
] as const;
export type PlantType = (typeof PLANT_TYPES)[number];

type Monthly = readonly [number, number, number, number, number, number, number, number, number, number, number, number];

/**
 * Monthly plant coefficients, northern-hemisphere calendar (January first).
 * - Turf: monthly shape is common practice (low in winter, peak in the growing season),
 *   scaled so the annual mean is exactly the UC landscape average (Meyer et al. 1985):
 *   0.80 cool season, 0.60 warm season; no month exceeds the F56 Table 12 mid-season
 *   Kc (0.95 cool, 0.85 warm).
 * - Shrubs, trees, groundcover: WUCOLS landscape species factor, "moderate" class 0.4–0.6
 *   (Costello & Jones, UC Cooperative Extension / California DWR), midpoint 0.5, held
 *   constant through the year. Choosing the moderate class is common practice.
 * - Vegetables: F56 Table 12 "small vegetables" Kc ini 0.70, mid 1.05, end 0.95, laid out
 *   over a northern-hemisphere growing season (calendar is common practice).
 */
export const MONTHLY_PLANT_COEFFICIENTS: Readonly<Record<PlantType, Monthly>> = {
  cool_season_turf: [0.65, 0.7, 0.8, 0.9, 0.9, 0.9, 0.85, 0.85, 0.85, 0.8, 0.7, 0.7],
  warm_season_turf: [0.4, 0.45, 0.55, 0.65, 0.75, 0.8, 0.8, 0.75, 0.65, 0.55, 0.45, 0.4],
  shrubs: [0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5],
  trees: [0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5],
  groundcover: [0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5],
  vegetables: [0.7, 0.7, 0.7, 0.8, 0.95, 1.05, 1.05, 1.05, 0.95, 0.8, 0.7, 0.7],
};

/**
 * Soil water depletion fraction p before stress, per plant type.
 * Turf: F56 Table 22 (cool season 0.40, warm season 0.50). Others are common practice:
 * 0.50 for shrubs, trees and groundcover; 0.40 for vegetables (tomato, F56 Example 36).
 */
export const DEPLETION_FRACTION: Readonly<Record<PlantType, number>> = {
  cool_season_turf: 0.4,
  warm_season_turf: 0.5,
  shrubs: 0.5,
  trees: 0.5,
  groundcover: 0.5,
  vegetables: 0.4,
};

function checkMonth(month: unknown, field = 'month'): number {
  const m = requireInteger(field, month, 1);
  if (m > 12) throw new DomainInputError(field, `${field} must be within [1, 12] (got ${m})`);
  return m;
}

/**
 * Plant coefficient for a plant type and calendar month (1…12). For southern-hemisphere
 * sites (latitudeDeg < 0) the seasonal calendar is shifted by six months.
 */
export function plantCoefficient(plantType: PlantType, month: number, latitudeDeg?: number): number {
  requireOneOf('plantType', plantType, PLANT_TYPES);
  let m = checkMonth(month);
  if (latitudeDeg !== undefined && checkLatitude(latitudeDeg) < 0) m = ((m + 5) % 12) + 1;
  return MONTHLY_PLANT_COEFFICIENTS[plantType][m - 1];
}

/**
 * Depletion fraction adjusted for the day's ETc (F56 Chapter 8, note to Table 22):
 * p = p_table + 0.04 (5 − ETc), limited to 0.1…0.8.
 */
export function adjustedDepletionFraction(pTable: number, etcMmDay: number): number {
  requireInRange('pTable', pTable, 0, 1, { minExclusive: true });
  const etc = requireNonNegative('etcMmDay', etcMmDay);
  return Math.min(0.8, Math.max(0.1, pTable + 0.04 * (5 - etc)));
}

// ---------------------------------------------------------------------------------------
// Soils

export const SOIL_TEXTURES = ['sand', 'loamy_sand', 'sandy_loam', 'loam', 'silt_loam', 'clay_loam', 'clay'] as const;
export type SoilTexture = (typeof SOIL_TEXTURES)[number];

export interface SoilProperties {
  /** θFC − θWP, m³/m³. */
  availableWater: number;
  /** Published range for θFC − θWP, or null when not tabulated. */
  availableWaterRange: readonly [number, number] | null;
  availableWaterSource: string;
  /** Basic intake rate, mm/h. */
  intakeRateMmH: number;
  intakeRateRange: readonly [number, number] | null;
  intakeRateSource: string;
}

const T19 = 'FAO-56 Table 19, midpoint';
const BIR = 'FAO Training Manual No. 1 (Brouwer et al. 1985), Annex 2, midpoint';

export const SOIL_PROPERTIES: Readonly<Record<SoilTexture, SoilProperties>> = {
  sand: {
    availableWater: 0.08,
    availableWaterRange: [0.05, 0.11],
    availableWaterSource: T19,
    intakeRateMmH: 40,
    intakeRateRange: null,
    intakeRateSource: 'common practice (manual gives "more than 30 mm/h")',
  },
  loamy_sand: {
    availableWater: 0.09,
    availableWaterRange: [0.06, 0.12],
    availableWaterSource: T19,
    intakeRateMmH: 30,
    intakeRateRange: null,
    intakeRateSource: 'common practice (between sand and sandy loam)',
  },
  sandy_loam: {
    availableWater: 0.13,
    availableWaterRange: [0.11, 0.15],
    availableWaterSource: T19,
    intakeRateMmH: 25,
    intakeRateRange: [20, 30],
    intakeRateSource: BIR,
  },
  loam: {
    availableWater: 0.155,
    availableWaterRange: [0.13, 0.18],
    availableWaterSource: T19,
    intakeRateMmH: 15,
    intakeRateRange: [10, 20],
    intakeRateSource: BIR,
  },
  silt_loam: {
    availableWater: 0.16,
    availableWaterRange: [0.13, 0.19],
    availableWaterSource: T19,
    intakeRateMmH: 10,
    intakeRateRange: null,
    intakeRateSource: 'common practice (between loam and clay loam)',
  },
  clay_loam: {
    availableWater: 0.16,
    availableWaterRange: null,
    availableWaterSource: 'common practice (not in Table 19; between the loam and clay midpoints)',
    intakeRateMmH: 7.5,
    intakeRateRange: [5, 10],
    intakeRateSource: BIR,
  },
  clay: {
    availableWater: 0.16,
    availableWaterRange: [0.12, 0.2],
    availableWaterSource: T19,
    intakeRateMmH: 3,
    intakeRateRange: [1, 5],
    intakeRateSource: BIR,
  },
};

export function soilProperties(texture: SoilTexture): SoilProperties {
  return SOIL_PROPERTIES[requireOneOf('soil', texture, SOIL_TEXTURES)];
}

/** A soil given as a texture, as θFC − θWP (m³/m³), or as θFC and θWP. */
export type SoilWater = SoilTexture | number | { fieldCapacity: number; wiltingPoint: number };

function availableWaterOf(soil: SoilWater, field = 'soil'): number {
  if (typeof soil === 'string') return soilProperties(soil).availableWater;
  if (typeof soil === 'number') {
    return requireInRange(field, soil, 0, 1, { minExclusive: true, unit: 'm³/m³' });
  }
  if (soil !== null && typeof soil === 'object') {
    const fc = requireInRange(`${field}.fieldCapacity`, soil.fieldCapacity, 0, 1, { unit: 'm³/m³' });
    const wp = requireInRange(`${field}.wiltingPoint`, soil.wiltingPoint, 0, 1, { unit: 'm³/m³' });
    if (wp >= fc) {
      throw new DomainInputError(`${field}.wiltingPoint`, `${field}.wiltingPoint (${wp}) must be below fieldCapacity (${fc})`);
    }
    return fc - wp;
  }
  throw new DomainInputError(field, `${field} must be a soil texture, a number or { fieldCapacity, wiltingPoint }`);
}

/** Total available water in the root zone TAW = 1000 (θFC − θWP) Zr, mm (F56 Eq. 82). */
export function totalAvailableWater(soil: SoilWater, rootDepthM: number): number {
  const aw = availableWaterOf(soil);
  const zr = requireInRange('rootDepthM', rootDepthM, 0, 10, { minExclusive: true, unit: 'm' });
  return 1000 * aw * zr;
}

/** Readily available water RAW = p · TAW, mm (F56 Eq. 83). */
export function readilyAvailableWater(tawMm: number, p: number): number {
  const taw = requireNonNegative('tawMm', tawMm);
  requireInRange('p', p, 0, 1, { minExclusive: true });
  return p * taw;
}

// ---------------------------------------------------------------------------------------
// Rain

export interface EffectiveRainOptions {
  /** Daily rain at or below this is lost to interception and evaporation, mm (default 3). */
  thresholdMm?: number;
  /** Fraction of the rain above the threshold that reaches the root zone (default 0.8). */
  fraction?: number;
}

export const DEFAULT_RAIN_THRESHOLD_MM = 3;
export const DEFAULT_RAIN_FRACTION = 0.8;

/**
 * Effective daily rain, mm (common practice): rain up to a threshold is ignored, a fixed
 * fraction of the rest counts: eff = fraction × max(0, rain − threshold).
 */
export function effectiveRain(rainMm: number, options: EffectiveRainOptions = {}): number {
  const rain = requireNonNegative('rainMm', rainMm);
  const threshold =
    options.thresholdMm === undefined ? DEFAULT_RAIN_THRESHOLD_MM : requireNonNegative('thresholdMm', options.thresholdMm);
  const fraction =
    options.fraction === undefined ? DEFAULT_RAIN_FRACTION : requireInRange('fraction', options.fraction, 0, 1);
  return fraction * Math.max(0, rain - threshold);
}

// ---------------------------------------------------------------------------------------
// Soil-water balance

export interface BalanceDay {
  et0Mm: number;
  rainMm: number;
  irrigationMm: number;
  /** Calendar month for the plant coefficient; falls back to the zone's month. */
  month?: number;
}

export interface BalanceZone {
  plantType: PlantType;
  soil: SoilWater;
  rootDepthM: number;
  /** Month used for days that carry none. */
  month?: number;
  /** Site latitude; negative shifts the plant calendar (southern hemisphere). */
  latitudeDeg?: number;
  /** Root-zone depletion at the start of the first day, mm (default 0, at field capacity). */
  initialDepletionMm?: number;
  /** Override of the plant coefficient (e.g. a measured landscape coefficient). */
  plantCoefficient?: number;
  effectiveRain?: EffectiveRainOptions;
}

export interface BalanceResult {
  month: number;
  kc: number;
  etcMm: number;
  effectiveRainMm: number;
  irrigationMm: number;
  /** Root-zone depletion at the end of the day, mm, within 0…TAW. */
  depletionMm: number;
  tawMm: number;
  p: number;
  rawMm: number;
  /** Depletion has reached the readily available water. */
  needsWater: boolean;
  /** Water beyond field capacity that drains below the root zone, mm. */
  deepPercolationMm: number;
}

/**
 * Daily root-zone depletion (F56 Eq. 85, simplified): Dr,i = Dr,i−1 − Peff,i − Ii + ETc,i,
 * with capillary rise 0, runoff folded into effective rain, and no water-stress reduction
 * (Ks = 1). Water that would bring Dr below 0 is deep percolation (Eq. 88); Dr is capped at
 * TAW. RAW uses p adjusted for the day's ETc.
 */
export function soilWaterBalance(days: BalanceDay[], zone: BalanceZone): BalanceResult[] {
  if (!Array.isArray(days)) throw new DomainInputError('days', 'days must be an array');
  if (zone === null || typeof zone !== 'object') throw new DomainInputError('zone', 'zone must be an object');
  const plantType = requireOneOf('zone.plantType', zone.plantType, PLANT_TYPES);
  const taw = totalAvailableWater(zone.soil, zone.rootDepthM);
  if (zone.month !== undefined) checkMonth(zone.month, 'zone.month');
  const kcOverride =
    zone.plantCoefficient === undefined
      ? undefined
      : requireInRange('zone.plantCoefficient', zone.plantCoefficient, 0, 2);
  let depletion =
    zone.initialDepletionMm === undefined
      ? 0
      : requireInRange('zone.initialDepletionMm', zone.initialDepletionMm, 0, taw, { unit: 'mm' });

  return days.map((d, i) => {
    if (d === null || typeof d !== 'object') throw new DomainInputError(`days[${i}]`, `days[${i}] must be an object`);
    const et0 = requireNonNegative(`days[${i}].et0Mm`, d.et0Mm);
    const rain = requireNonNegative(`days[${i}].rainMm`, d.rainMm);
    const irrigation = requireNonNegative(`days[${i}].irrigationMm`, d.irrigationMm);
    const monthRaw = d.month ?? zone.month;
    if (monthRaw === undefined) {
      throw new DomainInputError(`days[${i}].month`, `days[${i}].month is required when the zone has no month`);
    }
    const month = checkMonth(monthRaw, `days[${i}].month`);
    const kc = kcOverride ?? plantCoefficient(plantType, month, zone.latitudeDeg);
    const etc = requireFiniteResult(kc * et0, [[`days[${i}].et0Mm`, et0, 1]]);
    const peff = effectiveRain(rain, zone.effectiveRain);
    let next = requireFiniteResult(depletion - peff - irrigation + etc, [
      [`days[${i}].irrigationMm`, irrigation, 1],
      [`days[${i}].rainMm`, rain, 1],
      [`days[${i}].et0Mm`, et0, 1],
    ]);
    let deepPercolation = 0;
    if (next < 0) {
      deepPercolation = -next;
      next = 0;
    }
    if (next > taw) next = taw;
    depletion = next;
    const p = adjustedDepletionFraction(DEPLETION_FRACTION[plantType], etc);
    const raw = readilyAvailableWater(taw, p);
    return {
      month,
      kc,
      etcMm: etc,
      effectiveRainMm: peff,
      irrigationMm: irrigation,
      depletionMm: depletion,
      tawMm: taw,
      p,
      rawMm: raw,
      needsWater: depletion >= raw - 1e-9,
      deepPercolationMm: deepPercolation,
    };
  });
}

// ---------------------------------------------------------------------------------------
// From depletion to minutes

export interface WateringNeedInput {
  /** Root-zone depletion to replace, mm (net depth). */
  depletionMm: number;
  /** Zone precipitation rate, mm/h. */
  precipitationRateMmH: number;
  /** Application efficiency, (0, 1] (default 1). */
  efficiency?: number;
  /** Soil intake rate, mm/h; taken from `soil` when absent. */
  intakeRateMmH?: number;
  soil?: SoilTexture;
  maxCycles?: number;
  minSoakMinutes?: number;
  minCycleMinutes?: number;
  surfaceStorageMm?: number;
}

export interface WateringNeed {
  netDepthMm: number;
  grossDepthMm: number;
  minutes: number;
  cycles: number[];
  soakMinutes: number;
  runoffExpected: boolean;
}

/**
 * Net depth (the depletion, refilling to field capacity), gross depth (net / efficiency),
 * run minutes (runMinutes) and cycles (cycleAndSoak). Without an intake rate or a soil the
 * run is one cycle.
 */
export function wateringNeed(input: WateringNeedInput): WateringNeed {
  if (input === null || typeof input !== 'object') throw new DomainInputError('input', 'wateringNeed needs an object');
  const net = requireNonNegative('depletionMm', input.depletionMm);
  const efficiency = input.efficiency ?? 1;
  let minutes: number;
  try {
    minutes = runMinutes(net, input.precipitationRateMmH, efficiency);
  } catch (e) {
    // runMinutes names its depth depthMm; here that input is the depletion.
    if (e instanceof DomainInputError && e.field === 'depthMm') {
      throw new DomainInputError('depletionMm', e.message.replace(/^depthMm/, 'depletionMm'));
    }
    throw e;
  }
  const intake =
    input.intakeRateMmH !== undefined
      ? requirePositive('intakeRateMmH', input.intakeRateMmH)
      : input.soil !== undefined
        ? soilProperties(input.soil).intakeRateMmH
        : undefined;
  if (intake === undefined) {
    return {
      netDepthMm: net,
      grossDepthMm: net / efficiency,
      minutes,
      cycles: minutes > 0 ? [minutes] : [],
      soakMinutes: 0,
      runoffExpected: false,
    };
  }
  const split = cycleAndSoak({
    totalMinutes: minutes,
    precipitationRateMmH: input.precipitationRateMmH,
    intakeRateMmH: intake,
    maxCycles: input.maxCycles,
    minSoakMinutes: input.minSoakMinutes,
    minCycleMinutes: input.minCycleMinutes,
    surfaceStorageMm: input.surfaceStorageMm,
  });
  return {
    netDepthMm: net,
    grossDepthMm: net / efficiency,
    minutes,
    cycles: split.cycles,
    soakMinutes: split.soakMinutes,
    runoffExpected: split.runoffExpected,
  };
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
