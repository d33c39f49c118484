/**
 * The point-spread function (PSF) of an image: an elliptical Gaussian (a restoring beam, or FWHMs given in pixels)
 * or a user-supplied PSF image.
 *
 * Conventions
 * - Pixel coordinates (x, y): x along the first FITS axis (columns), y along the second (rows).
 * - Gaussian: FWHM = 2√(2 ln 2) σ (the standard identity for the normal density, e.g. any statistics handbook).
 * - Position angle PA (degrees) is measured from north (+y) through east. With east to the left (CDELT1 < 0, the
 *   usual sky orientation) the major axis points along (−sin PA, cos PA) in (x, y); with CDELT1 > 0 east is to the
 *   right and the major axis points along (+sin PA, cos PA) (FITS WCS paper II orientation; see METHOD-NOTES).
 * - Every PSF is normalised to unit integral over the plane, so a source of flux F adds F·PSF to the image and
 *   "flux" is the source's summed contribution in image units × pixels.
 * - Beam area Ω = π θmaj θmin / (4 ln 2) for a Gaussian with FWHMs θ (the published Gaussian beam solid angle,
 *   e.g. the NRAO/radio-astronomy textbook definition ∫ exp(−4 ln2 (x²/θmaj² + y²/θmin²)) dx dy); for an image
 *   PSF, Ω = (sum of the PSF)/(its peak) = 1/peak of the unit-sum PSF.
 */

export const FWHM_PER_SIGMA = 2 * Math.sqrt(2 * Math.LN2);

/** An elliptical Gaussian PSF in pixel units. */
export interface GaussianPsf {
  kind: 'gaussian';
  fwhmMajorPx: number;
  fwhmMinorPx: number;
  /** Position angle of the major axis, degrees, north through east. */
  paDeg: number;
  /** True when east is to the left (CDELT1 < 0); decides the sense of the position angle in pixel space. */
  eastLeft: boolean;
}

/** A sampled PSF: pixel-integrated values on a grid, unit sum, its centre at pixel (centreX, centreY) (0-based). */
export interface ImagePsf {
  kind: 'image';
  width: number;
  height: number;
  /** Row-major, width × height, unit sum. */
  data: Float64Array;
  centreX: number;
  centreY: number;
}

export type Psf = GaussianPsf | ImagePsf;

/** A restoring beam as the FITS header gives it (BMAJ, BMIN, BPA), all in degrees. */
export interface Beam {
  majorDeg: number;
  minorDeg: number;
  paDeg: number;
}

/** The 2×2 covariance of a PSF in pixels² (xx, xy, yy). */
export interface PsfCovariance {
  xx: number;
  xy: number;
  yy: number;
}

function requirePositiveFinite(value: number, name: string): void {
  if (!Number.isFinite(value) || value <= 0) {
    throw new Error(`${name} must be a positive finite number (got ${value})`);
  }
}

/**
 * An elliptical Gaussian PSF from FWHMs in pixels and a position angle in degrees.
 * @param eastLeft true (default) for the usual orientation, CDELT1 < 0.
 */
export function psfFromFwhm(
  fwhmMajorPx: number,
  fwhmMinorPx: number,
  paDeg: number,
  eastLeft = true,
): GaussianPsf {
  requirePositiveFinite(fwhmMajorPx, 'PSF major-axis FWHM (pixels)');
  requirePositiveFinite(fwhmMinorPx, 'PSF minor-axis FWHM (pixels)');
  if (!Number.isFinite(paDeg))
    throw new Error(`PSF position angle must be a finite number of degrees (got ${paDeg})`);
  if (fwhmMinorPx > fwhmMajorPx * (1 + 1e-12)) {
    throw new Error(
      `PSF minor-axis FWHM (${fwhmMinorPx} px) is larger than the major-axis FWHM (${fwhmMajorPx} px); swap them`,
    );
  }
  if (fwhmMinorPx < 0.1) {
    throw new Error(
      `PSF FWHM ${fwhmMinorPx} px is below 0.1 pixel: the image is far too coarse for this PSF`,
    );
  }
  return { kind: 'gaussian', fwhmMajorPx, fwhmMinorPx, paDeg, eastLeft };
}

/**
 * An elliptical Gaussian PSF from a restoring beam (BMAJ/BMIN/BPA, degrees) and the pixel scale.
 * @param pixelScaleDeg |CDELT| in degrees per pixel (square pixels).
 * @param cdelt1 CDELT1 (or the sign of the first column of the CD matrix): negative means east to the left.
 */
export function psfFromBeam(beam: Beam, pixelScaleDeg: number, cdelt1: number): GaussianPsf {
  requirePositiveFinite(beam.majorDeg, 'Beam major axis BMAJ (degrees)');
  requirePositiveFinite(beam.minorDeg, 'Beam minor axis BMIN (degrees)');
  requirePositiveFinite(pixelScaleDeg, 'Pixel scale (degrees per pixel)');
  if (!Number.isFinite(cdelt1) || cdelt1 === 0)
    throw new Error(`CDELT1 must be a non-zero number (got ${cdelt1})`);
  const major = Math.max(beam.majorDeg, beam.minorDeg) / pixelScaleDeg;
  const minor = Math.min(beam.majorDeg, beam.minorDeg) / pixelScaleDeg;
  return psfFromFwhm(major, minor, beam.paDeg, cdelt1 < 0);
}

/** Unit vector of the major axis in pixel (x, y) for a position angle and orientation. */
export function majorAxisDirection(paDeg: number, eastLeft: boolean): [number, number] {
  const pa = (paDeg * Math.PI) / 180;
  return [(eastLeft ? -1 : 1) * Math.sin(pa), Math.cos(pa)];
}

/** Covariance of a Gaussian PSF in pixels². */
export function gaussianCovariance(psf: GaussianPsf): PsfCovariance {
  const sMaj = psf.fwhmMajorPx / FWHM_PER_SIGMA;
  const sMin = psf.fwhmMinorPx / FWHM_PER_SIGMA;
  const [ax, ay] = majorAxisDirection(psf.paDeg, psf.eastLeft);
  // minor axis b = (ay, −ax)
  const vMaj = sMaj * sMaj;
  const vMin = sMin * sMin;
  return {
    xx: vMaj * ax * ax + vMin * ay * ay,
    xy: (vMaj - vMin) * ax * ay,
    yy: vMaj * ay * ay + vMin * ax * ax,
  };
}

/**
 * Covariance of the PSF's light distribution itself (before pixel integration), pixels².
 * Image PSFs: second moments of the sampled values about their centroid minus 1/12 on each axis (the variance of
 * the uniform pixel box, which adds to any distribution's variance under pixel integration).
 */
export function psfCovariance(psf: Psf): PsfCovariance {
  if (psf.kind === 'gaussian') return gaussianCovariance(psf);
  const { width, height, data } = psf;
  let s = 0;
  let sx = 0;
  let sy = 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const v = data[y * width + x] ?? 0;
      s += v;
      sx += v * x;
      sy += v * y;
    }
  }
  const mx = sx / s;
  const my = sy / s;
  let xx = 0;
  let xy = 0;
  let yy = 0;
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const v = data[y * width + x] ?? 0;
      xx += v * (x - mx) * (x - mx);
      xy += v * (x - mx) * (y - my);
      yy += v * (y - my) * (y - my);
    }
  }
  return { xx: Math.max(xx / s - 1 / 12, 1e-6), xy: xy / s, yy: Math.max(yy / s - 1 / 12, 1e-6) };
}

/** Major/minor FWHM (pixels) of the Gaussian with the PSF's covariance. */
export function psfFwhmPx(psf: Psf): { major: number; minor: number } {
  if (psf.kind === 'gaussian') return { major: psf.fwhmMajorPx, minor: psf.fwhmMinorPx };
  const c = psfCovariance(psf);
  const mean = (c.xx + c.yy) / 2;
  const half = Math.sqrt(((c.xx - c.yy) / 2) ** 2 + c.xy * c.xy);
  return {
    major: FWHM_PER_SIGMA * Math.sqrt(mean + half),
    minor: FWHM_PER_SIGMA * Math.sqrt(Math.max(mean - half, 1e-6)),
  };
}

/** Beam area in pixels: π θmaj θmin / (4 ln 2) for a Gaussian; 1/peak for a unit-sum image PSF. */
export function psfBeamAreaPx(psf: Psf): number {
  if (psf.kind === 'gaussian') return (Math.PI * psf.fwhmMajorPx * psf.fwhmMinorPx) / (4 * Math.LN2);
  let peak = 0;
  for (const v of psf.data) peak = Math.max(peak, v);
  return 1 / peak;
}
