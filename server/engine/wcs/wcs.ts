/**
 * World coordinates of image axes 1 and 2, after the FITS WCS papers:
 * - Greisen & Calabretta (2002), A&A 395, 1061 (paper I): pixel p → intermediate world coordinates
 *   x_i = Σ_j s_i m_ij (p_j − r_j) with r = CRPIX, s = CDELT, m = PC (eq. 1–3), or x_i = Σ_j CD_ij (p_j − r_j);
 *   a linear axis then has world coordinate CRVAL_i + x_i.
 * - Calabretta & Greisen (2002), A&A 395, 1077 (paper II): celestial axes go x → (φ, θ) by the projection
 *   (see projections.ts), then (φ, θ) → (α, δ) by the spherical rotation of eq. 2 (and its inverse, eq. 5),
 *   with the native pole (α_p, δ_p) from CRVAL, LONPOLE (default φ_p = 0° if δ0 ≥ θ0 else 180°) and LATPOLE
 *   (default +90°) by eq. 8–10 and the special cases of section 2.4–2.5.
 *   The legacy CROTA2 becomes a PC matrix by paper II eq. 188–189.
 *   RADESYS defaults (paper II section 3.1): ICRS without EQUINOX; FK4 if EQUINOX < 1984; FK5 otherwise.
 * - SIP distortion ('-SIP' after the projection code, A_p_q/B_p_q with optional AP/BP) is applied to the pixel
 *   offsets before the matrix (sip.ts); other distortion conventions are reported in a warning and ignored.
 * Pixel coordinates are FITS 1-based: (1, 1) is the centre of the first pixel. Angles are in degrees.
 */
import { cardNumber, cardString, type HeaderCard } from '../io/header-card';
import { parseSip, type Sip } from './sip';
import { makeProjection, PROJECTION_CODES, type Projection, type ProjectionCode } from './projections';

const D2R = Math.PI / 180;
const R2D = 180 / Math.PI;

export type WcsFrame =
  'ICRS' | 'FK5' | 'FK4' | 'FK4-NO-E' | 'GAPPT' | 'galactic' | 'ecliptic' | 'supergalactic';

export interface Wcs {
  /** True when axes 1 and 2 are a longitude/latitude pair with a supported projection. */
  readonly isCelestial: boolean;
  /** The projection of a celestial WCS; null for a linear one. */
  readonly projection: ProjectionCode | null;
  /** CTYPE1, CTYPE2 as written. */
  readonly ctype: readonly [string, string];
  /** Sky frame of a celestial WCS (RADESYS or the CTYPE's galactic/ecliptic pair); null for a linear one. */
  readonly frame: WcsFrame | null;
  /** EQUINOX (or legacy EPOCH) in years for FK4/FK5 frames; null otherwise. */
  readonly equinox: number | null;
  /** 1 when the longitude is on pixel axis 1 (RA---/DEC-- order), 2 when the axes are swapped. */
  readonly longitudeAxis: 1 | 2;
  /** CRPIX1, CRPIX2. */
  readonly referencePixel: readonly [number, number];
  /** CRVAL1, CRVAL2 (degrees for celestial axes). */
  readonly referenceValue: readonly [number, number];
  /** The linear transformation CD = diag(CDELT)·PC as [cd11, cd12, cd21, cd22], units per pixel. */
  readonly matrix: readonly [number, number, number, number];
  /** Pixel (1-based) → world (lon, lat) in degrees; NaN where the projection has no solution. Longitude in [0, 360). */
  pixelToWorld(x: number, y: number): [lon: number, lat: number];
  /** World (lon, lat) in degrees → pixel (1-based); NaN where the projection cannot represent the point. */
  worldToPixel(lon: number, lat: number): [x: number, y: number];
  /** Size of one pixel step along pixel axes 1 and 2, in world units (degrees): the column norms of CD. */
  pixelScaleDeg(): [number, number];
  /**
   * −1 when the image has the sky's usual parity (east to the left when north is up, e.g. CDELT1 < 0),
   * +1 when mirrored. Computed from the sign of det(CD), with swapped axes taken into account.
   */
  cdelt1Sign(): 1 | -1;
}

/** Celestial CTYPE pairs: 4-character longitude and latitude prefixes (paper II, section 3). */
const CELESTIAL_PAIRS: readonly { lon: string; lat: string; frame: WcsFrame | null }[] = [
  { lon: 'RA--', lat: 'DEC-', frame: null },
  { lon: 'GLON', lat: 'GLAT', frame: 'galactic' },
  { lon: 'ELON', lat: 'ELAT', frame: 'ecliptic' },
  { lon: 'SLON', lat: 'SLAT', frame: 'supergalactic' },
];

/** Outcome of reading a header: the WCS, or null with the reason it could not be built. */
export interface WcsParseResult {
  wcs: Wcs | null;
  warnings: string[];
}

/** Builds the WCS of axes 1 and 2 from a header, or null when there is none usable. */
export function parseWcs(header: readonly HeaderCard[]): Wcs | null {
  return parseWcsWithWarnings(header).wcs;
}

/** As parseWcs, also saying why a WCS-looking header was not usable (unknown projection, singular matrix…). */
export function parseWcsWithWarnings(header: readonly HeaderCard[]): WcsParseResult {
  const warnings: string[] = [];
  const ctype: [string, string] = [cardString(header, 'CTYPE1') ?? '', cardString(header, 'CTYPE2') ?? ''];
  const crpix: [number, number] = [cardNumber(header, 'CRPIX1') ?? 0, cardNumber(header, 'CRPIX2') ?? 0];
  const crval: [number, number] = [cardNumber(header, 'CRVAL1') ?? 0, cardNumber(header, 'CRVAL2') ?? 0];
  const hasAnyWcs = ['CTYPE1', 'CRVAL1', 'CRPIX1', 'CDELT1', 'CD1_1', 'PC1_1'].some(
    (key) => cardNumber(header, key) !== undefined || cardString(header, key) !== undefined,
  );
  if (!hasAnyWcs) return { wcs: null, warnings };

  const matrix = linearMatrix(header, warnings);
  if (!matrix) return { wcs: null, warnings };

  const celestial = celestialAxes(ctype, warnings);
  if (celestial === 'invalid') return { wcs: null, warnings };
  if (celestial === null) return { wcs: linearWcs(ctype, crpix, crval, matrix), warnings };

  // Celestial axes are in degrees unless CUNIT says otherwise (paper I section 2.1.4); CRVAL and the matrix
  // rows are in that unit, so both are converted.
  for (const i of [0, 1] as const) {
    const unit = cardString(header, `CUNIT${i + 1}`)?.trim();
    if (!unit) continue;
    const factor = ANGLE_UNIT_DEG[unit];
    if (factor === undefined) {
      warnings.push(
        `CUNIT${i + 1} = '${unit}' is not an angle unit (deg, arcmin, arcsec, mas, rad); the WCS was left out`,
      );
      return { wcs: null, warnings };
    }
    crval[i] *= factor;
    const row = i === 0 ? ([0, 1] as const) : ([2, 3] as const);
    for (const k of row) matrix[k] *= factor;
  }

  for (const key of ['PV1_1', 'PV1_2']) {
    if (cardNumber(header, key.replace('1_', `${celestial.longitudeAxis}_`)) !== undefined) {
      warnings.push(`${key} (a moved fiducial point) is not supported; the WCS was left out`);
      return { wcs: null, warnings };
    }
  }
  const latAxis = celestial.longitudeAxis === 1 ? 2 : 1;
  const pv2 = new Map<number, number>();
  for (let m = 0; m <= 20; m++) {
    const value = cardNumber(header, `PV${latAxis}_${m}`);
    if (value !== undefined) pv2.set(m, value);
  }
  if (celestial.projection !== 'SIN' && [...pv2.keys()].some((m) => m > 0)) {
    warnings.push(`PV${latAxis}_m parameters are ignored for the ${celestial.projection} projection`);
  }
  const projection = makeProjection(celestial.projection, pv2);
  let sip: Sip | null = null;
  if (celestial.distortion === '-SIP') {
    sip = parseSip(header);
    if (!sip)
      warnings.push('CTYPE names SIP distortion but A_ORDER/B_ORDER are missing; positions ignore it');
  } else if (celestial.distortion !== '') {
    warnings.push(`The distortion '${celestial.distortion}' in CTYPE is not supported; positions ignore it`);
  }
  const lonAxisPv = celestial.longitudeAxis;
  const lonpole = cardNumber(header, 'LONPOLE') ?? cardNumber(header, `PV${lonAxisPv}_3`);
  const latpole = cardNumber(header, 'LATPOLE') ?? cardNumber(header, `PV${lonAxisPv}_4`);
  const { frame, equinox } = skyFrame(header, celestial.frame);
  const lon0 = celestial.longitudeAxis === 1 ? crval[0] : crval[1];
  const lat0 = celestial.longitudeAxis === 1 ? crval[1] : crval[0];
  const pole = nativePole(projection, lon0, lat0, lonpole, latpole);
  if (typeof pole === 'string') {
    warnings.push(pole);
    return { wcs: null, warnings };
  }
  return {
    wcs: celestialWcs({
      ctype,
      crpix,
      crval,
      matrix,
      longitudeAxis: celestial.longitudeAxis,
      projection,
      sip,
      pole,
      frame,
      equinox,
    }),
    warnings,
  };
}

type Matrix = [number, number, number, number];

/** Degrees per unit for the angle units of paper I, table 2 (with the usual prefixes). */
const ANGLE_UNIT_DEG: Record<string, number> = {
  deg: 1,
  arcmin: 1 / 60,
  arcsec: 1 / 3600,
  mas: 1 / 3.6e6,
  rad: 180 / Math.PI,
};

/** CD matrix from CD_ij, or CDELT·PC_ij, or CDELT with CROTA2 (paper II eq. 189: CROTA to CD). */
function linearMatrix(header: readonly HeaderCard[], warnings: string[]): Matrix | null {
  const cd = ['CD1_1', 'CD1_2', 'CD2_1', 'CD2_2'].map((key) => cardNumber(header, key));
  const pc = ['PC1_1', 'PC1_2', 'PC2_1', 'PC2_2'].map((key) => cardNumber(header, key));
  const hasPc = pc.some((v) => v !== undefined);
  const hasCd = cd.some((v) => v !== undefined);
  const cdelt1 = cardNumber(header, 'CDELT1') ?? 1;
  const cdelt2 = cardNumber(header, 'CDELT2') ?? 1;
  let matrix: Matrix;
  if (hasCd && !hasPc) {
    // Paper I section 2.1.2: CD_ij default to 0 when any CD card is present.
    matrix = [cd[0] ?? 0, cd[1] ?? 0, cd[2] ?? 0, cd[3] ?? 0];
  } else if (hasPc) {
    if (hasCd) warnings.push('Both PC and CD cards are present; the PC matrix with CDELT was used');
    const [p11 = 1, p12 = 0, p21 = 0, p22 = 1] = pc;
    matrix = [cdelt1 * p11, cdelt1 * p12, cdelt2 * p21, cdelt2 * p22];
  } else {
    const rho = (cardNumber(header, 'CROTA2') ?? 0) * D2R;
    const c = Math.cos(rho);
    const s = Math.sin(rho);
    matrix = [cdelt1 * c, -cdelt2 * s, cdelt1 * s, cdelt2 * c];
  }
  const det = matrix[0] * matrix[3] - matrix[1] * matrix[2];
  if (!Number.isFinite(det) || det === 0) {
    warnings.push('The WCS matrix (CDELT/PC/CD) is singular; the WCS was left out');
    return null;
  }
  return matrix;
}

interface CelestialAxes {
  longitudeAxis: 1 | 2;
  projection: ProjectionCode;
  frame: WcsFrame | null;
  /** What follows the projection code in CTYPE, e.g. '-SIP'; '' for none. */
  distortion: string;
}

/** Which axis holds the longitude and which projection; null for non-celestial axes, 'invalid' when inconsistent. */
function celestialAxes(ctype: [string, string], warnings: string[]): CelestialAxes | null | 'invalid' {
  const [c1, c2] = ctype.map((c) => c.trim().toUpperCase()) as [string, string];
  for (const pair of CELESTIAL_PAIRS) {
    for (const longitudeAxis of [1, 2] as const) {
      const lon = longitudeAxis === 1 ? c1 : c2;
      const lat = longitudeAxis === 1 ? c2 : c1;
      if (!lon.startsWith(pair.lon) || !lat.startsWith(pair.lat)) continue;
      const code = lon.slice(5, 8);
      const rest = lon.slice(8);
      if (code !== lat.slice(5, 8) || lon[4] !== '-' || lat[4] !== '-') {
        warnings.push(`CTYPE1 '${ctype[0]}' and CTYPE2 '${ctype[1]}' do not name the same projection`);
        return 'invalid';
      }
      if (!(PROJECTION_CODES as readonly string[]).includes(code)) {
        warnings.push(
          `The ${code} projection is not supported (TAN, SIN, ARC, STG, CAR are); the WCS was left out`,
        );
        return 'invalid';
      }
      return { longitudeAxis, projection: code as ProjectionCode, frame: pair.frame, distortion: rest };
    }
  }
  if ([c1, c2].some((c) => /^(RA--|DEC-|GLON|GLAT|ELON|ELAT)/.test(c))) {
    warnings.push(
      `CTYPE1 '${ctype[0]}' and CTYPE2 '${ctype[1]}' are not a celestial pair; the WCS was left out`,
    );
    return 'invalid';
  }
  return null;
}

/** RADESYS/EQUINOX with the defaults of paper II section 3.1. */
function skyFrame(
  header: readonly HeaderCard[],
  pairFrame: WcsFrame | null,
): { frame: WcsFrame; equinox: number | null } {
  if (pairFrame) return { frame: pairFrame, equinox: null };
  const equinoxCard = cardNumber(header, 'EQUINOX') ?? cardNumber(header, 'EPOCH');
  const radesys = (cardString(header, 'RADESYS') ?? cardString(header, 'RADECSYS'))?.trim().toUpperCase();
  const known: WcsFrame[] = ['ICRS', 'FK5', 'FK4', 'FK4-NO-E', 'GAPPT'];
  let frame: WcsFrame;
  if (radesys && (known as string[]).includes(radesys)) frame = radesys as WcsFrame;
  else if (equinoxCard === undefined) frame = 'ICRS';
  else frame = equinoxCard < 1984 ? 'FK4' : 'FK5';
  let equinox: number | null = null;
  if (frame === 'FK4' || frame === 'FK4-NO-E') equinox = equinoxCard ?? 1950;
  if (frame === 'FK5') equinox = equinoxCard ?? 2000;
  return { frame, equinox };
}

interface NativePole {
  /** Celestial coordinates of the native pole, degrees. */
  alphaP: number;
  deltaP: number;
  /** Native longitude of the celestial pole (LONPOLE), degrees. */
  phiP: number;
}

/** Paper II section 2.4: the native pole from the reference point, LONPOLE and LATPOLE. */
function nativePole(
  projection: Projection,
  alpha0: number,
  delta0: number,
  lonpole: number | undefined,
  latpole: number | undefined,
): NativePole | string {
  const { phi0, theta0 } = projection;
  const phiP = lonpole ?? (delta0 >= theta0 ? 0 : 180);
  const latP = latpole ?? 90;
  if (theta0 === 90) return { alphaP: alpha0, deltaP: delta0, phiP };
  // Eq. 8: δ_p = arg(sin θ0, cos θ0 cos(φ_p − φ0)) ± acos(sin δ0 / √(1 − cos²θ0 sin²(φ_p − φ0))).
  const dPhi = (phiP - phi0) * D2R;
  const x = Math.sin(theta0 * D2R);
  const y = Math.cos(theta0 * D2R) * Math.cos(dPhi);
  const z = Math.hypot(x, y);
  const sinDelta0 = Math.sin(delta0 * D2R);
  if (z === 0 || Math.abs(sinDelta0 / z) > 1 + 1e-12) {
    return 'LONPOLE is inconsistent with CRVAL for this projection; the WCS was left out';
  }
  const u = Math.atan2(x, y) * R2D;
  const v = Math.acos(Math.min(1, Math.max(-1, sinDelta0 / z))) * R2D;
  const candidates = [u + v, u - v]
    .map((d) => (d > 180 ? d - 360 : d < -180 ? d + 360 : d))
    .filter((d) => Math.abs(d) <= 90 + 1e-10);
  if (candidates.length === 0) return 'No native pole fits CRVAL and LONPOLE; the WCS was left out';
  let deltaP = candidates.reduce((best, d) => (Math.abs(d - latP) < Math.abs(best - latP) ? d : best));
  deltaP = Math.max(-90, Math.min(90, deltaP));
  let alphaP: number;
  // Eq. 9–10 and the special cases of section 2.4 (pole at a celestial pole or reference point at a pole).
  if (Math.abs(delta0) === 90) alphaP = alpha0;
  else if (deltaP === 90) alphaP = alpha0 + phiP - phi0 - 180;
  else if (deltaP === -90) alphaP = alpha0 - phiP + phi0;
  else {
    const cosDeltaP = Math.cos(deltaP * D2R);
    const cosDelta0 = Math.cos(delta0 * D2R);
    const num = (Math.sin(dPhi) * Math.cos(theta0 * D2R)) / cosDelta0;
    const den = (Math.sin(theta0 * D2R) - Math.sin(deltaP * D2R) * sinDelta0) / (cosDeltaP * cosDelta0);
    alphaP = alpha0 - Math.atan2(num, den) * R2D;
  }
  return { alphaP, deltaP, phiP };
}

function normalise360(angle: number): number {
  const a = angle % 360;
  return a < 0 ? a + 360 : a === 360 ? 0 : a;
}

function normalise180(angle: number): number {
  const a = normalise360(angle);
  return a > 180 ? a - 360 : a;
}

/** Shared pixel ↔ intermediate arithmetic (paper I eq. 1–3), with SIP distortion of the offsets when given. */
function intermediate(
  crpix: readonly [number, number],
  m: Matrix,
  sip: Sip | null = null,
): {
  toIntermediate(x: number, y: number): [number, number];
  toPixel(u: number, v: number): [number, number];
} {
  const det = m[0] * m[3] - m[1] * m[2];
  const inv: Matrix = [m[3] / det, -m[1] / det, -m[2] / det, m[0] / det];
  return {
    toIntermediate(x, y) {
      const [dx, dy] = sip ? sip.distort(x - crpix[0], y - crpix[1]) : [x - crpix[0], y - crpix[1]];
      return [m[0] * dx + m[1] * dy, m[2] * dx + m[3] * dy];
    },
    toPixel(u, v) {
      const dx = inv[0] * u + inv[1] * v;
      const dy = inv[2] * u + inv[3] * v;
      const [px, py] = sip ? sip.undistort(dx, dy) : [dx, dy];
      return [px + crpix[0], py + crpix[1]];
    },
  };
}

function scales(m: Matrix): [number, number] {
  return [Math.hypot(m[0], m[2]), Math.hypot(m[1], m[3])];
}

function linearWcs(
  ctype: [string, string],
  crpix: [number, number],
  crval: [number, number],
  matrix: Matrix,
): Wcs {
  const lin = intermediate(crpix, matrix);
  const det = matrix[0] * matrix[3] - matrix[1] * matrix[2];
  return {
    isCelestial: false,
    projection: null,
    ctype,
    frame: null,
    equinox: null,
    longitudeAxis: 1,
    referencePixel: crpix,
    referenceValue: crval,
    matrix,
    pixelToWorld(x, y) {
      const [u, v] = lin.toIntermediate(x, y);
      return [crval[0] + u, crval[1] + v];
    },
    worldToPixel(a, b) {
      return lin.toPixel(a - crval[0], b - crval[1]);
    },
    pixelScaleDeg: () => scales(matrix),
    cdelt1Sign: () => (det < 0 ? -1 : 1),
  };
}

/**
 * Latitude (degrees) from its sine z and the two other direction cosines x, y of the rotated unit vector.
 * asin(z) loses half the digits near the poles (|z| → 1); there acos(√(x² + y²)) is well conditioned.
 * (wcslib makes the same switch at |z| > 0.99.)
 */
function latitudeFrom(z: number, x: number, y: number): number {
  if (Math.abs(z) > 0.99) {
    const angle = Math.acos(Math.min(1, Math.hypot(x, y))) * R2D;
    return z < 0 ? -angle : angle;
  }
  return Math.asin(z) * R2D;
}

interface CelestialParts {
  ctype: [string, string];
  crpix: [number, number];
  crval: [number, number];
  matrix: Matrix;
  longitudeAxis: 1 | 2;
  projection: Projection;
  sip: Sip | null;
  pole: NativePole;
  frame: WcsFrame;
  equinox: number | null;
}

/** Celestial WCS: pixel → intermediate (paper I) → native (projection) → celestial (paper II eq. 2 and 5). */
function celestialWcs(parts: CelestialParts): Wcs {
  const { ctype, crpix, crval, matrix, longitudeAxis, projection, pole } = parts;
  const lin = intermediate(crpix, matrix, parts.sip);
  const sinDp = Math.sin(pole.deltaP * D2R);
  const cosDp = Math.cos(pole.deltaP * D2R);
  /**
   * The spherical rotation of paper II: eq. 2 (native → celestial, from φ_p to α_p) and eq. 5 (celestial →
   * native, from α_p to φ_p) have the same form,
   *   out = outPole + arg(sin b cos δ_p − cos b sin δ_p cos(a − inPole), −cos b sin(a − inPole)),
   *   latitude = asin(sin b sin δ_p + cos b cos δ_p cos(a − inPole)).
   */
  const rotate = (a: number, b: number, inPole: number, outPole: number): [number, number] => {
    const bRad = b * D2R;
    const da = (a - inPole) * D2R;
    const sinB = Math.sin(bRad);
    const cosB = Math.cos(bRad);
    const ey = -cosB * Math.sin(da);
    const ex = sinB * cosDp - cosB * sinDp * Math.cos(da);
    return [
      outPole + Math.atan2(ey, ex) * R2D,
      latitudeFrom(sinB * sinDp + cosB * cosDp * Math.cos(da), ex, ey),
    ];
  };
  const det = matrix[0] * matrix[3] - matrix[1] * matrix[2];
  // With the longitude on axis 2 the pixel-to-(lon, lat) map has one extra reflection.
  const parity: 1 | -1 = det < 0 === (longitudeAxis === 1) ? -1 : 1;
  return {
    isCelestial: true,
    projection: projection.code,
    ctype,
    frame: parts.frame,
    equinox: parts.equinox,
    longitudeAxis,
    referencePixel: crpix,
    referenceValue: crval,
    matrix,
    pixelToWorld(x, y) {
      const [u, v] = lin.toIntermediate(x, y);
      const [px, py] = longitudeAxis === 1 ? [u, v] : [v, u];
      const [phi, theta] = projection.toNative(px, py);
      if (!Number.isFinite(phi) || !Number.isFinite(theta)) return [NaN, NaN];
      const [lon, lat] = rotate(phi, theta, pole.phiP, pole.alphaP);
      return [normalise360(lon), lat];
    },
    worldToPixel(lon, lat) {
      const [phi, theta] = rotate(lon, lat, pole.alphaP, pole.phiP);
      // Keep φ near φ0 so that CAR maps the reference longitude to the reference pixel.
      const [px, py] = projection.fromNative(projection.phi0 + normalise180(phi - projection.phi0), theta);
      if (!Number.isFinite(px) || !Number.isFinite(py)) return [NaN, NaN];
      return longitudeAxis === 1 ? lin.toPixel(px, py) : lin.toPixel(py, px);
    },
    pixelScaleDeg: () => scales(matrix),
    cdelt1Sign: () => parity,
  };
}
