/**
 * The two matches a catalogue builder asks for, on top of {@link crossMatchSky} / {@link crossMatchPixels}:
 * a run's catalogue against an uploaded reference catalogue, and one run's catalogue against another's.
 * Sky matching is used whenever both sides have RA/Dec; pixel matching otherwise (same image grid).
 * The radius defaults to half the geometric-mean beam FWHM (common practice, see defaultMatchRadiusArcsec);
 * pixel matching needs its radius given, since the beam is known in arcsec.
 */
import type { CatalogueSource } from '../../shared/catalogue';
import { crossMatchPixels, crossMatchSky, defaultMatchRadiusArcsec } from './cross-match';
import type { CrossMatchResult } from './cross-match';
import type { MatchTableEntry } from './match-table';
import type { ReferenceCatalogue } from './read-reference';

export interface MatchRadiusOptions {
  /** Sky match radius. @default half the geometric-mean beam FWHM */
  radiusArcsec?: number;
  /** Pixel match radius (required for pixel matching). */
  radiusPixels?: number;
  /** Beam of our image, for the default sky radius. */
  beam?: { majorArcsec: number; minorArcsec: number } | null;
}

function skyRadius(options: MatchRadiusOptions): number {
  if (options.radiusArcsec !== undefined) return options.radiusArcsec;
  if (options.beam) return defaultMatchRadiusArcsec(options.beam);
  throw new Error('Give a match radius in arcsec: the image has no beam to derive one from.');
}

function pixelRadius(options: MatchRadiusOptions): number {
  if (options.radiusPixels !== undefined) return options.radiusPixels;
  throw new Error('Give a match radius in pixels for matching by pixel position.');
}

const hasSky = (source: CatalogueSource) => source.ra !== null && source.dec !== null;

/** Our catalogue against a reference read by readReferenceCatalogue. */
export function matchToReference(
  ours: readonly CatalogueSource[],
  reference: ReferenceCatalogue,
  options: MatchRadiusOptions = {},
): CrossMatchResult {
  if (reference.positions === 'sky') {
    if (!ours.every(hasSky)) {
      throw new Error(
        'The reference has RA/Dec but some of our sources have none (the image has no celestial WCS); ' +
          'read the reference by pixel position instead.',
      );
    }
    return crossMatchSky(ours, reference.entries, { radiusArcsec: skyRadius(options) });
  }
  const theirs = reference.entries.map((entry) => ({ x: entry.x!, y: entry.y!, flux: entry.flux }));
  return crossMatchPixels(ours, theirs, { radiusPixels: pixelRadius(options) });
}

/** One run's catalogue against another's: on the sky when both have RA/Dec, else by pixel position. */
export function matchRuns(
  ours: readonly CatalogueSource[],
  theirs: readonly CatalogueSource[],
  options: MatchRadiusOptions = {},
): CrossMatchResult {
  if (ours.every(hasSky) && theirs.every(hasSky)) {
    return crossMatchSky(ours, theirs, { radiusArcsec: skyRadius(options) });
  }
  return crossMatchPixels(ours, theirs, { radiusPixels: pixelRadius(options) });
}

/** Reference entries as rows of the matched table (id, or the row number when the file has no id column). */
export function referenceTableEntries(reference: ReferenceCatalogue): MatchTableEntry[] {
  return reference.entries.map((entry) => ({ ...entry, id: entry.id ?? `row ${entry.row}` }));
}
