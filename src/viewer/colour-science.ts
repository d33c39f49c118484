/**
 * sRGB ↔ CIELAB under the D65 white point.
 * - sRGB transfer function and primaries: IEC 61966-2-1:1999 (sRGB), encoded value V ∈ [0, 1]:
 *   linear = V / 12.92 for V ≤ 0.04045, else ((V + 0.055) / 1.055)^2.4; XYZ from linear RGB with the standard
 *   matrix (rows X, Y, Z: 0.4124 0.3576 0.1805 / 0.2126 0.7152 0.0722 / 0.0193 0.1192 0.9505).
 * - CIELAB: CIE 15:2004 (Colorimetry, 3rd ed.), section 8.2.1: L* = 116 f(Y/Yn) − 16, a* = 500[f(X/Xn) − f(Y/Yn)],
 *   b* = 200[f(Y/Yn) − f(Z/Zn)], f(t) = t^(1/3) for t > (6/29)³, else t/(3 (6/29)²) + 4/29; D65 white
 *   Xn = 0.95047, Yn = 1, Zn = 1.08883.
 */

export const D65 = { x: 0.95047, y: 1, z: 1.08883 } as const;

const DELTA = 6 / 29;

function f(t: number): number {
  return t > DELTA ** 3 ? Math.cbrt(t) : t / (3 * DELTA * DELTA) + 4 / 29;
}

function fInverse(u: number): number {
  return u > DELTA ? u ** 3 : 3 * DELTA * DELTA * (u - 4 / 29);
}

export function srgbToLinear(encoded: number): number {
  return encoded <= 0.04045 ? encoded / 12.92 : ((encoded + 0.055) / 1.055) ** 2.4;
}

export function linearToSrgb(linear: number): number {
  return linear <= 0.0031308 ? 12.92 * linear : 1.055 * linear ** (1 / 2.4) - 0.055;
}

/** 8-bit sRGB → [L*, a*, b*]. */
export function srgb8ToLab(r: number, g: number, b: number): [number, number, number] {
  const R = srgbToLinear(r / 255);
  const G = srgbToLinear(g / 255);
  const B = srgbToLinear(b / 255);
  const X = 0.4124 * R + 0.3576 * G + 0.1805 * B;
  const Y = 0.2126 * R + 0.7152 * G + 0.0722 * B;
  const Z = 0.0193 * R + 0.1192 * G + 0.9505 * B;
  const fy = f(Y / D65.y);
  return [116 * fy - 16, 500 * (f(X / D65.x) - fy), 200 * (fy - f(Z / D65.z))];
}

/** [L*, a*, b*] → linear RGB (may fall outside [0, 1] when the colour is out of the sRGB gamut). */
export function labToLinearRgb(L: number, a: number, b: number): [number, number, number] {
  const fy = (L + 16) / 116;
  const X = D65.x * fInverse(fy + a / 500);
  const Y = D65.y * fInverse(fy);
  const Z = D65.z * fInverse(fy - b / 200);
  // Inverse of the sRGB matrix above (IEC 61966-2-1).
  return [
    3.2406 * X - 1.5372 * Y - 0.4986 * Z,
    -0.9689 * X + 1.8758 * Y + 0.0415 * Z,
    0.0557 * X - 0.204 * Y + 1.057 * Z,
  ];
}
