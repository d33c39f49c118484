/**
 * One-to-one cross-matching of two catalogues, on the sky (RA/Dec) or in pixel coordinates.
 *
 * Distance on the sphere: the haversine formula (R. W. Sinnott, "Virtues of the Haversine", Sky & Telescope 68(2),
 * 159, 1984):  d = 2·asin √( sin²(Δδ/2) + cos δ₁ cos δ₂ sin²(Δα/2) ),
 * which stays accurate for the arcsecond separations that matter here (the plain cosine-rule formula loses
 * precision below about an arcminute in double precision).
 *
 * Method:
 * 1. Candidate pairs: every (ours, theirs) pair closer than the radius. On the sky the reference catalogue is
 *    indexed in declination bands one radius high, each sorted by RA; a query looks at its own band and the two
 *    neighbours, within RA ± asin(sin r / cos δ) (the exact RA half-width of a cap of radius r at declination δ),
 *    with RA wrap-around at 0/360° and the whole band near the poles. In pixels a square grid of cell size r.
 *    Cost ≈ O((N + M) log M + candidates) instead of O(N·M).
 * 2. Assignment: candidates sorted by distance (ties by our index, then theirs) and accepted greedily while both
 *    members are still free. Each accepted pair is the closest remaining one, so mutual nearest neighbours always
 *    pair up; in crowded groups this greedy rule does not minimise the total distance the way an optimal
 *    (Hungarian) assignment would, which is the usual trade-off accepted in catalogue matching.
 *
 * Offsets are ours − theirs: ΔRA·cos δ (δ the pair's mean declination, RA difference wrapped to ±180°) and ΔDec,
 * in arcsec; in pixel mode Δx, Δy in pixels. Summary statistics carry their standard errors.
 */

export interface SkyEntry {
  ra: number | null;
  dec: number | null;
  flux?: number | null;
}

export interface PixelEntry {
  x: number;
  y: number;
  flux?: number | null;
}

export interface MatchedPair {
  /** Index into our catalogue. */
  ours: number;
  /** Index into the other catalogue. */
  theirs: number;
  /** Separation: arcsec on the sky, pixels in pixel mode. */
  separation: number;
  /** ours − theirs: ΔRA·cos(Dec) in arcsec (sky) or Δx in pixels. */
  offset1: number;
  /** ours − theirs: ΔDec in arcsec (sky) or Δy in pixels. */
  offset2: number;
  /** our flux / their flux, null when either is missing or theirs is 0. */
  fluxRatio: number | null;
}

export interface OffsetStatistics {
  count: number;
  /** Mean offsets and their standard errors (sample std / √n; null below 2 pairs). */
  mean1: number | null;
  mean1Err: number | null;
  mean2: number | null;
  mean2Err: number | null;
  /** Root mean square of each offset component and of the separation, about zero. */
  rms1: number | null;
  rms2: number | null;
  rmsSeparation: number | null;
}

export interface FluxRatioStatistics {
  /** Pairs with a usable ratio. */
  count: number;
  median: number | null;
  /** Standard error of the median, ≈ 1.2533 · scatter / √n (asymptotic, for normal scatter). */
  medianErr: number | null;
  /** Robust scatter: 1.4826 × the median absolute deviation (equals σ for normal data). */
  robustScatter: number | null;
}

export interface CrossMatchResult {
  mode: 'sky' | 'pixel';
  /** Unit of separations and offsets. */
  unit: 'arcsec' | 'pixel';
  radius: number;
  pairs: MatchedPair[];
  /** Indices of our sources with no partner within the radius (after one-to-one assignment). */
  onlyOurs: number[];
  onlyTheirs: number[];
  offsets: OffsetStatistics;
  fluxRatio: FluxRatioStatistics;
}

const DEG = Math.PI / 180;
const ARCSEC_PER_DEG = 3600;

/** Great-circle distance in degrees between two points given in degrees (haversine formula, Sinnott 1984). */
export function haversineDistanceDeg(ra1: number, dec1: number, ra2: number, dec2: number): number {
  const sinHalfDec = Math.sin(((dec2 - dec1) * DEG) / 2);
  const sinHalfRa = Math.sin(((ra2 - ra1) * DEG) / 2);
  const h = sinHalfDec * sinHalfDec + Math.cos(dec1 * DEG) * Math.cos(dec2 * DEG) * sinHalfRa * sinHalfRa;
  return (2 * Math.asin(Math.sqrt(Math.min(1, h)))) / DEG;
}

/**
 * Default match radius: half the geometric-mean beam FWHM, √(major·minor)/2. Common practice (no published
 * source): a true counterpart is normally well inside half a beam, and a second unrelated source rarely is.
 */
export function defaultMatchRadiusArcsec(beam: { majorArcsec: number; minorArcsec: number }): number {
  if (!(beam.majorArcsec > 0 && beam.minorArcsec > 0)) {
    throw new Error('The beam FWHM must be positive to derive a match radius; give the radius explicitly.');
  }
  return 0.5 * Math.sqrt(beam.majorArcsec * beam.minorArcsec);
}

/** Wraps an angle difference in degrees to (−180, 180]. */
function wrapDeg(delta: number): number {
  let d = delta % 360;
  if (d > 180) d -= 360;
  if (d <= -180) d += 360;
  return d;
}

function checkRadius(radius: number, unit: string): void {
  if (!(Number.isFinite(radius) && radius > 0))
    throw new Error(`The match radius must be a positive number of ${unit}.`);
}

function checkSky(entries: readonly SkyEntry[], which: string): void {
  entries.forEach((entry, index) => {
    const { ra, dec } = entry;
    if (ra === null || dec === null || !Number.isFinite(ra) || !Number.isFinite(dec)) {
      throw new Error(
        `Entry ${index + 1} of ${which} has no RA/Dec; match by pixel position instead (e.g. an image without a celestial WCS).`,
      );
    }
    if (dec < -90 || dec > 90)
      throw new Error(`Entry ${index + 1} of ${which} has Dec ${dec}°, outside −90…90°.`);
  });
}

interface Candidate {
  ours: number;
  theirs: number;
  separation: number;
}

/** Greedy one-to-one assignment on candidates sorted by separation (ties: our index, then theirs). */
function assignGreedy(candidates: Candidate[], nOurs: number, nTheirs: number) {
  candidates.sort((a, b) => a.separation - b.separation || a.ours - b.ours || a.theirs - b.theirs);
  const ourTaken = new Uint8Array(nOurs);
  const theirTaken = new Uint8Array(nTheirs);
  const accepted: Candidate[] = [];
  for (const candidate of candidates) {
    if (ourTaken[candidate.ours] || theirTaken[candidate.theirs]) continue;
    ourTaken[candidate.ours] = 1;
    theirTaken[candidate.theirs] = 1;
    accepted.push(candidate);
  }
  accepted.sort((a, b) => a.ours - b.ours);
  const onlyOurs: number[] = [];
  for (let i = 0; i < nOurs; i++) if (!ourTaken[i]) onlyOurs.push(i);
  const onlyTheirs: number[] = [];
  for (let j = 0; j < nTheirs; j++) if (!theirTaken[j]) onlyTheirs.push(j);
  return { accepted, onlyOurs, onlyTheirs };
}

/** First index in a sorted array whose value is ≥ target. */
function lowerBound(sorted: Float64Array, target: number): number {
  let lo = 0;
  let hi = sorted.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (sorted[mid]! < target) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

interface DecBand {
  ra: Float64Array;
  index: Int32Array;
}

function buildDecBands(theirs: readonly SkyEntry[], bandHeight: number): Map<number, DecBand> {
  const members = new Map<number, number[]>();
  theirs.forEach((entry, j) => {
    const band = Math.floor((entry.dec! + 90) / bandHeight);
    let list = members.get(band);
    if (!list) members.set(band, (list = []));
    list.push(j);
  });
  const bands = new Map<number, DecBand>();
  for (const [band, list] of members) {
    const normalised = list.map((j) => ({ j, ra: ((theirs[j]!.ra! % 360) + 360) % 360 }));
    normalised.sort((a, b) => a.ra - b.ra);
    bands.set(band, {
      ra: Float64Array.from(normalised, (item) => item.ra),
      index: Int32Array.from(normalised, (item) => item.j),
    });
  }
  return bands;
}

function skyCandidates(
  ours: readonly SkyEntry[],
  theirs: readonly SkyEntry[],
  radiusDeg: number,
): Candidate[] {
  const bands = buildDecBands(theirs, radiusDeg);
  const candidates: Candidate[] = [];
  ours.forEach((entry, i) => {
    const ra = ((entry.ra! % 360) + 360) % 360;
    const dec = entry.dec!;
    const band = Math.floor((dec + 90) / radiusDeg);
    // Exact RA half-width of a cap of radius r at declination δ; the whole circle when the cap reaches a pole.
    const reachesPole = Math.abs(dec) + radiusDeg >= 90;
    const halfWidth = reachesPole
      ? 180
      : Math.asin(Math.sin(radiusDeg * DEG) / Math.cos(dec * DEG)) / DEG + 1e-9;
    const ranges: [number, number][] =
      halfWidth >= 180
        ? [[0, 360]]
        : ra - halfWidth < 0
          ? [
              [0, ra + halfWidth],
              [ra - halfWidth + 360, 360],
            ]
          : ra + halfWidth > 360
            ? [
                [ra - halfWidth, 360],
                [0, ra + halfWidth - 360],
              ]
            : [[ra - halfWidth, ra + halfWidth]];
    for (let b = band - 1; b <= band + 1; b++) {
      const members = bands.get(b);
      if (!members) continue;
      for (const [low, high] of ranges) {
        for (let k = lowerBound(members.ra, low); k < members.ra.length && members.ra[k]! <= high; k++) {
          const j = members.index[k]!;
          const other = theirs[j]!;
          const separation = haversineDistanceDeg(entry.ra!, dec, other.ra!, other.dec!);
          if (separation <= radiusDeg) candidates.push({ ours: i, theirs: j, separation });
        }
      }
    }
  });
  return candidates;
}

function pixelCandidates(
  ours: readonly PixelEntry[],
  theirs: readonly PixelEntry[],
  radius: number,
): Candidate[] {
  const grid = new Map<string, number[]>();
  theirs.forEach((entry, j) => {
    const key = `${Math.floor(entry.x / radius)},${Math.floor(entry.y / radius)}`;
    let list = grid.get(key);
    if (!list) grid.set(key, (list = []));
    list.push(j);
  });
  const candidates: Candidate[] = [];
  ours.forEach((entry, i) => {
    const cx = Math.floor(entry.x / radius);
    const cy = Math.floor(entry.y / radius);
    for (let gx = cx - 1; gx <= cx + 1; gx++) {
      for (let gy = cy - 1; gy <= cy + 1; gy++) {
        for (const j of grid.get(`${gx},${gy}`) ?? []) {
          const other = theirs[j]!;
          const separation = Math.hypot(entry.x - other.x, entry.y - other.y);
          if (separation <= radius) candidates.push({ ours: i, theirs: j, separation });
        }
      }
    }
  });
  return candidates;
}

function fluxRatioOf(
  ourFlux: number | null | undefined,
  theirFlux: number | null | undefined,
): number | null {
  if (ourFlux === null || ourFlux === undefined || theirFlux === null || theirFlux === undefined) return null;
  if (!Number.isFinite(ourFlux) || !Number.isFinite(theirFlux) || theirFlux === 0) return null;
  return ourFlux / theirFlux;
}

/** Median of a copy of the values (null when empty). */
export function median(values: readonly number[]): number | null {
  if (values.length === 0) return null;
  const sorted = [...values].sort((a, b) => a - b);
  const mid = sorted.length >> 1;
  return sorted.length % 2 === 1 ? sorted[mid]! : (sorted[mid - 1]! + sorted[mid]!) / 2;
}

/**
 * Robust scatter 1.4826·MAD: the median absolute deviation scaled by 1/Φ⁻¹(3/4) so it equals σ for normal data
 * (e.g. Rousseeuw & Croux 1993, JASA 88, 1273).
 */
export function robustScatter(values: readonly number[]): number | null {
  const centre = median(values);
  if (centre === null) return null;
  return 1.482602218505602 * median(values.map((value) => Math.abs(value - centre)))!;
}

function offsetStatistics(pairs: readonly MatchedPair[]): OffsetStatistics {
  const n = pairs.length;
  if (n === 0) {
    return {
      count: 0,
      mean1: null,
      mean1Err: null,
      mean2: null,
      mean2Err: null,
      rms1: null,
      rms2: null,
      rmsSeparation: null,
    };
  }
  const meanOf = (pick: (pair: MatchedPair) => number) =>
    pairs.reduce((sum, pair) => sum + pick(pair), 0) / n;
  const mean1 = meanOf((pair) => pair.offset1);
  const mean2 = meanOf((pair) => pair.offset2);
  const standardError = (pick: (pair: MatchedPair) => number, mean: number) =>
    n < 2 ? null : Math.sqrt(pairs.reduce((sum, pair) => sum + (pick(pair) - mean) ** 2, 0) / (n - 1) / n);
  return {
    count: n,
    mean1,
    mean1Err: standardError((pair) => pair.offset1, mean1),
    mean2,
    mean2Err: standardError((pair) => pair.offset2, mean2),
    rms1: Math.sqrt(meanOf((pair) => pair.offset1 ** 2)),
    rms2: Math.sqrt(meanOf((pair) => pair.offset2 ** 2)),
    rmsSeparation: Math.sqrt(meanOf((pair) => pair.separation ** 2)),
  };
}

function fluxRatioStatistics(pairs: readonly MatchedPair[]): FluxRatioStatistics {
  const ratios = pairs.map((pair) => pair.fluxRatio).filter((ratio): ratio is number => ratio !== null);
  const scatter = robustScatter(ratios);
  return {
    count: ratios.length,
    median: median(ratios),
    medianErr:
      scatter === null || ratios.length < 2 ? null : (1.2533141373155 * scatter) / Math.sqrt(ratios.length),
    robustScatter: scatter,
  };
}

/** Matches two catalogues on the sky within `radiusArcsec` (see the file comment for the method). */
export function crossMatchSky(
  ours: readonly SkyEntry[],
  theirs: readonly SkyEntry[],
  options: { radiusArcsec: number },
): CrossMatchResult {
  checkRadius(options.radiusArcsec, 'arcsec');
  checkSky(ours, 'our catalogue');
  checkSky(theirs, 'the other catalogue');
  const radiusDeg = options.radiusArcsec / ARCSEC_PER_DEG;
  const { accepted, onlyOurs, onlyTheirs } = assignGreedy(
    skyCandidates(ours, theirs, radiusDeg),
    ours.length,
    theirs.length,
  );
  const pairs = accepted.map(({ ours: i, theirs: j, separation }): MatchedPair => {
    const a = ours[i]!;
    const b = theirs[j]!;
    const meanDec = ((a.dec! + b.dec!) / 2) * DEG;
    return {
      ours: i,
      theirs: j,
      separation: separation * ARCSEC_PER_DEG,
      offset1: wrapDeg(a.ra! - b.ra!) * Math.cos(meanDec) * ARCSEC_PER_DEG,
      offset2: (a.dec! - b.dec!) * ARCSEC_PER_DEG,
      fluxRatio: fluxRatioOf(a.flux, b.flux),
    };
  });
  return {
    mode: 'sky',
    unit: 'arcsec',
    radius: options.radiusArcsec,
    pairs,
    onlyOurs,
    onlyTheirs,
    offsets: offsetStatistics(pairs),
    fluxRatio: fluxRatioStatistics(pairs),
  };
}

/** Matches two catalogues by pixel position (same image grid, e.g. no celestial WCS) within `radiusPixels`. */
export function crossMatchPixels(
  ours: readonly PixelEntry[],
  theirs: readonly PixelEntry[],
  options: { radiusPixels: number },
): CrossMatchResult {
  checkRadius(options.radiusPixels, 'pixels');
  for (const [which, entries] of [
    ['our catalogue', ours],
    ['the other catalogue', theirs],
  ] as const) {
    entries.forEach((entry, index) => {
      if (!Number.isFinite(entry.x) || !Number.isFinite(entry.y)) {
        throw new Error(`Entry ${index + 1} of ${which} has no usable pixel position.`);
      }
    });
  }
  const candidates = pixelCandidates(ours, theirs, options.radiusPixels);
  const { accepted, onlyOurs, onlyTheirs } = assignGreedy(candidates, ours.length, theirs.length);
  const pairs = accepted.map(({ ours: i, theirs: j, separation }): MatchedPair => {
    const a = ours[i]!;
    const b = theirs[j]!;
    return {
      ours: i,
      theirs: j,
      separation,
      offset1: a.x - b.x,
      offset2: a.y - b.y,
      fluxRatio: fluxRatioOf(a.flux, b.flux),
    };
  });
  return {
    mode: 'pixel',
    unit: 'pixel',
    radius: options.radiusPixels,
    pairs,
    onlyOurs,
    onlyTheirs,
    offsets: offsetStatistics(pairs),
    fluxRatio: fluxRatioStatistics(pairs),
  };
}
