/**
 * Map projections between intermediate world coordinates (x, y) in degrees and native spherical
 * coordinates (φ, θ) in degrees, from Calabretta & Greisen (2002), "Representations of celestial coordinates
 * in FITS", A&A 395, 1077 (FITS WCS paper II):
 * - zenithal projections (section 5.1), with R_θ the native radius: x = R_θ sin φ, y = −R_θ cos φ,
 *   and inversely φ = arg(−y, x), R_θ = √(x² + y²):
 *   TAN (gnomonic, eq. 54–55): R_θ = (180/π) cot θ;
 *   SIN (orthographic/slant, eq. 59–63): x = (180/π)(cos θ sin φ + ξ(1 − sin θ)), y = −(180/π)(cos θ cos φ − η(1 − sin θ))
 *     with ξ = PV2_1, η = PV2_2;
 *   ARC (zenithal equidistant, eq. 66–67): R_θ = 90° − θ;
 *   STG (stereographic, eq. 64–65): R_θ = (360/π) tan((90° − θ)/2);
 * - CAR (plate carrée, section 5.2.3, eq. 84–85): x = φ, y = θ.
 * Points that the projection cannot represent (beyond the horizon of TAN or SIN, θ = −90° for STG, outside
 * the SIN disc) map to NaN.
 */

const D2R = Math.PI / 180;
const R2D = 180 / Math.PI;

export type ProjectionCode = 'TAN' | 'SIN' | 'ARC' | 'STG' | 'CAR';
export const PROJECTION_CODES: readonly ProjectionCode[] = ['TAN', 'SIN', 'ARC', 'STG', 'CAR'];

export interface Projection {
  code: ProjectionCode;
  /** Native coordinates of the fiducial point (φ0, θ0), degrees (paper II, table 13 defaults). */
  phi0: number;
  theta0: number;
  /** (x, y) degrees → (φ, θ) degrees; NaN outside the projection's domain. */
  toNative(x: number, y: number): [number, number];
  /** (φ, θ) degrees → (x, y) degrees; NaN where the projection cannot represent the point. */
  fromNative(phi: number, theta: number): [number, number];
}

/** atan2 in degrees, with arg(0, 0) = 0 as in the paper's convention for the native pole. */
function argDeg(x: number, y: number): number {
  return x === 0 && y === 0 ? 0 : Math.atan2(y, x) * R2D;
}

function zenithal(
  code: ProjectionCode,
  radius: (theta: number) => number,
  theta: (r: number) => number,
): Projection {
  return {
    code,
    phi0: 0,
    theta0: 90,
    toNative(x, y) {
      const r = Math.hypot(x, y);
      return [argDeg(-y, x), theta(r)];
    },
    fromNative(phi, th) {
      const r = radius(th);
      return [r * Math.sin(phi * D2R), -r * Math.cos(phi * D2R)];
    },
  };
}

const TAN = zenithal(
  'TAN',
  (theta) => (theta > 0 ? R2D / Math.tan(theta * D2R) : NaN),
  (r) => Math.atan2(R2D, r) * R2D,
);

const ARC = zenithal(
  'ARC',
  (theta) => 90 - theta,
  (r) => (r <= 180 ? 90 - r : NaN),
);

const STG = zenithal(
  'STG',
  (theta) => (theta > -90 ? 2 * R2D * Math.tan(((90 - theta) / 2) * D2R) : NaN),
  (r) => 90 - 2 * Math.atan(r / (2 * R2D)) * R2D,
);

/** SIN with the slant parameters ξ = PV2_1 and η = PV2_2 (0 and 0 for the orthographic projection). */
function sinProjection(xi: number, eta: number): Projection {
  return {
    code: 'SIN',
    phi0: 0,
    theta0: 90,
    toNative(x, y) {
      const X = x * D2R;
      const Y = y * D2R;
      if (xi === 0 && eta === 0) {
        const r2 = X * X + Y * Y;
        if (r2 > 1) return [NaN, NaN];
        return [argDeg(-Y, X), Math.acos(Math.sqrt(r2)) * R2D];
      }
      // Paper II eq. 60–63: a sin²θ + 2b sinθ + c = 0, root closest to θ = 90°. Written for w = 1 − sinθ,
      // a w² − 2(a + b) w + (X² + Y²) = 0, whose small root in the stable form below keeps full precision
      // near the reference point (where sinθ → 1 and asin would lose half the digits).
      const a = xi * xi + eta * eta + 1;
      const dx = X - xi;
      const dy = Y - eta;
      const b = xi * dx + eta * dy;
      const c = dx * dx + dy * dy - 1;
      const discriminant = b * b - a * c;
      if (discriminant < 0) return [NaN, NaN];
      const r2 = X * X + Y * Y;
      const half = a + b;
      let w: number;
      if (half > 0) w = r2 / (half + Math.sqrt(discriminant));
      else w = 1 - Math.min(1, (-b + Math.sqrt(discriminant)) / a);
      if (!(w >= 0 && w <= 2)) return [NaN, NaN];
      const theta = Math.atan2(1 - w, Math.sqrt(w * (2 - w))) * R2D;
      return [argDeg(-(Y - eta * w), X - xi * w), theta];
    },
    fromNative(phi, theta) {
      const p = phi * D2R;
      const t = theta * D2R;
      const cosT = Math.cos(t);
      const oneMinus = 1 - Math.sin(t);
      // Beyond the horizon of the slant orthographic projection the point is not visible (paper II, sect. 5.1.5).
      if (
        xi === 0 && eta === 0 ? theta < 0 : cosT * (xi * Math.sin(p) - eta * Math.cos(p)) + Math.sin(t) < 0
      ) {
        return [NaN, NaN];
      }
      return [R2D * (cosT * Math.sin(p) + xi * oneMinus), -R2D * (cosT * Math.cos(p) - eta * oneMinus)];
    },
  };
}

const CAR: Projection = {
  code: 'CAR',
  phi0: 0,
  theta0: 0,
  toNative(x, y) {
    return Math.abs(y) <= 90 ? [x, y] : [NaN, NaN];
  },
  fromNative(phi, theta) {
    return [phi, theta];
  },
};

/** The projection for a three-letter code, with its PV2_m parameters (only SIN takes any here). */
export function makeProjection(code: ProjectionCode, pv2: ReadonlyMap<number, number>): Projection {
  switch (code) {
    case 'TAN':
      return TAN;
    case 'ARC':
      return ARC;
    case 'STG':
      return STG;
    case 'CAR':
      return CAR;
    case 'SIN':
      return sinProjection(pv2.get(1) ?? 0, pv2.get(2) ?? 0);
  }
}
