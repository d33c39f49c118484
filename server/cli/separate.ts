/**
 * Command line: separate one sky image into its diffuse and compact components, with no server or database.
 *
 *   npm run separate -- IMAGE --out DIR [--likelihood gaussian|poisson] [--psf-fwhm MAJ,MIN,PA] [--sigma S]
 *                       [--settings FILE.json] [--plane N] [--formats csv,votable,fits,png]
 *   npm run separate -- IMAGE_1 IMAGE_2 [...] --out DIR [--psf-fwhm I:MAJ,MIN,PA] [--sigma I:S]
 *                       [--likelihood [I:]KIND] [--unit [I:]BUNIT] [--scale-prior W] ...
 * Several images are fitted jointly (run-joint-separation.ts); image 1 is the reference for the catalogue's
 * pixel positions. Per-image options take the image's number before a colon and may be repeated; without one,
 * --likelihood and --unit apply to every image, --psf-fwhm and --sigma to image 1.
 *
 * Writes catalogue.csv (and the other catalogue formats asked for), diffuse.fits, diffuse_sky.fits,
 * compact.fits, model.fits, residual.fits, residual_norm.fits and run.json into DIR (run-separation.ts);
 * with png among the formats also quicklook.png, the input with the sources marked (runs/quicklook-image.ts).
 * A progress bar on a terminal; otherwise a plain progress line on stderr every few seconds.
 * Bad input: exit code 1 and one line on stderr (the reader's or the engine's message). Ctrl-C: exit code 130.
 */
import { readFileSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Command, CommanderError, Option } from 'commander';
import cliProgress from 'cli-progress';
import { ZodError } from 'zod';
import { type CatalogueFormat, parseCatalogueFormats } from '../catalogue/write-catalogue-files';
import type { SeparationProgress } from '../engine/separate';
import { runJointSeparation } from './run-joint-separation';
import { runSeparation } from './run-separation';

const softwareVersion = (
  JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string }
).version;

/** An option value for one image (its 1-based number) or, with index null, for the default images. */
interface Indexed<T> {
  index: number | null;
  value: T;
}

type PsfFwhm = { fwhmMajor: number; fwhmMinor: number; pa: number };

interface CliOptions {
  out: string;
  likelihood?: Indexed<'gaussian' | 'poisson'>[];
  psfFwhm?: Indexed<PsfFwhm>[];
  sigma?: Indexed<number>[];
  unit?: Indexed<string>[];
  scalePrior?: number;
  settings?: string;
  plane?: number;
  formats: string;
}

/** --formats: the catalogue formats, and whether `png` (the quick-look picture) is among them. */
export function parseOutputFormats(text: string): { catalogue: CatalogueFormat[]; quicklook: boolean } {
  const items = text.split(',').map((item) => item.trim().toLowerCase());
  const quicklook = items.includes('png');
  const rest = items.filter((item) => item !== 'png' && item !== '');
  if (quicklook && rest.length === 0) return { catalogue: [], quicklook };
  try {
    return { catalogue: parseCatalogueFormats(rest.join(',')), quicklook };
  } catch (error) {
    throw new Error(`${oneLine(error).replace(/\.$/, '')} (or png for the quick-look picture).`, {
      cause: error,
    });
  }
}

/** One line for a person: the first problem of a settings error, the message of anything else. */
export function oneLine(error: unknown): string {
  if (error instanceof ZodError) {
    const issue = error.issues[0];
    const where = issue && issue.path.length > 0 ? `setting ${issue.path.join('.')}: ` : 'settings: ';
    return `${where}${issue?.message ?? 'invalid'}`;
  }
  const message = error instanceof Error ? error.message : String(error);
  return message.split('\n')[0]!.trim();
}

/** A repeatable option whose value may start with an image number and a colon ("2:9,9,0"). */
function indexed<T>(name: string, parse: (text: string) => T) {
  return (text: string, previous: Indexed<T>[] = []): Indexed<T>[] => {
    const match = /^\s*(\d+)\s*:(.*)$/.exec(text);
    if (!match) return [...previous, { index: null, value: parse(text) }];
    const index = Number(match[1]);
    if (index < 1) throw new Error(`${name}: images are numbered from 1, got "${text}"`);
    return [...previous, { index, value: parse(match[2]!) }];
  };
}

function parseLikelihood(text: string): 'gaussian' | 'poisson' {
  const kind = text.trim();
  if (kind !== 'gaussian' && kind !== 'poisson') {
    throw new Error(`--likelihood needs gaussian or poisson (or I:KIND for image I), got "${text}"`);
  }
  return kind;
}

/** The value for image `index` (1-based): its own, else the un-numbered one when `fallback` allows. */
function valueFor<T>(list: Indexed<T>[] | undefined, index: number, fallback: boolean): T | undefined {
  let found: T | undefined;
  for (const entry of list ?? []) {
    if (entry.index === index || (entry.index === null && fallback)) found = entry.value;
  }
  return found;
}

function checkIndices(name: string, list: Indexed<unknown>[] | undefined, images: number): void {
  for (const entry of list ?? []) {
    if (entry.index !== null && entry.index > images) {
      throw new Error(
        `${name} ${entry.index}:… names image ${entry.index}, but ${images === 1 ? 'only one image was' : `${images} images were`} given`,
      );
    }
  }
}

function parsePsfFwhm(text: string): PsfFwhm {
  const parts = text.split(',').map((part) => Number(part.trim()));
  if (parts.length !== 3 || parts.some((v) => !Number.isFinite(v)) || !(parts[0]! > 0) || !(parts[1]! > 0)) {
    throw new Error(`--psf-fwhm needs MAJ,MIN,PA (FWHMs in pixels > 0, PA in degrees), got "${text}"`);
  }
  return { fwhmMajor: parts[0]!, fwhmMinor: parts[1]!, pa: parts[2]! };
}

function parsePositive(name: string, integer: boolean) {
  return (text: string): number => {
    const value = Number(text);
    if (!Number.isFinite(value) || value <= 0 || (integer && !Number.isInteger(value))) {
      throw new Error(`${name} needs a ${integer ? 'whole number ≥ 1' : 'positive number'}, got "${text}"`);
    }
    return value;
  };
}

async function readSettingsFile(path: string): Promise<Record<string, unknown>> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    throw new Error(`Cannot read the settings file ${path}`, { cause: error });
  }
  let parsed: unknown;
  try {
    parsed = JSON.parse(text);
  } catch (error) {
    throw new Error(`Settings file ${path} is not valid JSON: ${oneLine(error)}`, { cause: error });
  }
  if (parsed === null || typeof parsed !== 'object' || Array.isArray(parsed)) {
    throw new Error(`Settings file ${path} must hold a JSON object`);
  }
  return parsed as Record<string, unknown>;
}

/** Progress shown while the fit runs: a bar on a terminal, else a line on stderr at most every 5 s. */
function progressReporter(maxIterations: number) {
  const interactive = process.stdout.isTTY === true;
  if (interactive) {
    const bar = new cliProgress.SingleBar(
      {
        format: ' {stage} |{bar}| iteration {value}  objective {objective}  evaluations {evaluations}',
        hideCursor: true,
      },
      cliProgress.Presets.shades_classic,
    );
    let started = false;
    return {
      update(p: SeparationProgress) {
        if (!started) {
          bar.start(maxIterations, 0, { stage: p.stage, objective: '', evaluations: 0 });
          started = true;
        }
        if (p.iteration > bar.getTotal()) bar.setTotal(p.iteration);
        bar.update(p.iteration, {
          stage: p.stage,
          objective: p.objective.toFixed(2),
          evaluations: p.evaluations,
        });
      },
      stop() {
        if (started) bar.stop();
      },
    };
  }
  let last = 0;
  return {
    update(p: SeparationProgress) {
      const now = Date.now();
      if (now - last < 5000) return;
      last = now;
      process.stderr.write(
        `${p.phase} ${p.stage}: iteration ${p.iteration}, objective ${p.objective.toFixed(2)}, evaluations ${p.evaluations}\n`,
      );
    },
    stop() {},
  };
}

export async function main(argv: string[]): Promise<number> {
  const program = new Command('separate')
    .description('Separate a sky image into a diffuse field and a catalogue of compact sources.')
    .argument('<images...>', 'FITS (or TIFF/PNG/JPEG) image to separate')
    .requiredOption('--out <dir>', 'folder for the outputs (created if missing)')
    .option(
      '--likelihood <kind>',
      'noise model: gaussian or poisson (I:KIND for image I of several)',
      indexed('--likelihood', parseLikelihood),
    )
    .option(
      '--psf-fwhm <maj,min,pa>',
      "Gaussian PSF: FWHM major and minor (pixels), position angle (degrees); I:MAJ,MIN,PA for image I's own pixels",
      indexed('--psf-fwhm', parsePsfFwhm),
    )
    .option(
      '--sigma <s>',
      'Gaussian noise σ in image units (estimated from the image when left out); I:S for image I',
      indexed('--sigma', parsePositive('--sigma', false)),
    )
    .option(
      '--unit <bunit>',
      'several images: the brightness unit when BUNIT is missing or wrong; I:BUNIT for image I',
      indexed('--unit', (t) => t.trim()),
    )
    .addOption(
      new Option('--scale-prior <w>', 'several images: width of the flux-scale prior (0.05 = 5%)').argParser(
        parsePositive('--scale-prior', false),
      ),
    )
    .option('--settings <file>', 'JSON file with separation settings (command-line options override it)')
    .option('--plane <n>', '1-based plane of a FITS cube', parsePositive('--plane', true))
    .option('--formats <list>', 'catalogue formats: csv, votable, fits; png adds quicklook.png', 'csv')
    .exitOverride()
    .configureOutput({ writeErr: () => {} });
  let images: string[];
  let options: CliOptions;
  try {
    program.parse(argv, { from: 'user' });
    images = program.args;
    options = program.opts<CliOptions>();
  } catch (error) {
    if (error instanceof CommanderError) {
      if (error.code === 'commander.helpDisplayed' || error.code === 'commander.version') return 0;
      // Commander's messages start with "error: "; its argument parsers' messages come through as they are.
      process.stderr.write(`${error.message.replace(/^error: /, '')}\n`);
      return 1;
    }
    process.stderr.write(`${oneLine(error)}\n`);
    return 1;
  }
  try {
    checkIndices('--likelihood', options.likelihood, images.length);
    checkIndices('--psf-fwhm', options.psfFwhm, images.length);
    checkIndices('--sigma', options.sigma, images.length);
    checkIndices('--unit', options.unit, images.length);
    if (images.length === 1 && (options.unit || options.scalePrior !== undefined)) {
      throw new Error('--unit and --scale-prior are for joint fits of several images');
    }
  } catch (error) {
    process.stderr.write(`${oneLine(error)}\n`);
    return 1;
  }
  if (images.length > 1) return runJoint(images, options);

  const controller = new AbortController();
  const onSigint = () => controller.abort();
  process.once('SIGINT', onSigint);
  let reporter: ReturnType<typeof progressReporter> | null = null;
  try {
    const formats = parseOutputFormats(options.formats);
    const settings = options.settings ? await readSettingsFile(options.settings) : {};
    const likelihood = valueFor(options.likelihood, 1, true);
    const psfFwhm = valueFor(options.psfFwhm, 1, true);
    const sigma = valueFor(options.sigma, 1, true);
    if (likelihood) settings.likelihood = likelihood;
    if (psfFwhm) settings.psf = psfFwhm;
    if (sigma !== undefined) settings.noiseSigma = sigma;
    const maxIterations = typeof settings.maxIterations === 'number' ? settings.maxIterations : 300;
    reporter = progressReporter(maxIterations);
    const summary = await runSeparation({
      imagePath: images[0]!,
      outDir: options.out,
      settings,
      plane: options.plane,
      formats: formats.catalogue,
      quicklook: formats.quicklook,
      softwareVersion,
      onProgress: reporter.update,
      signal: controller.signal,
    });
    reporter.stop();
    const r = summary.result;
    process.stderr.write(
      `${r.catalogue.length} sources; ${r.iterations} iterations, ${r.evaluations} evaluations, ` +
        `${summary.wallTimeSeconds.toFixed(1)} s${r.converged ? '' : ' (not converged)'}; wrote ${summary.files.length} files to ${options.out}\n`,
    );
    return 0;
  } catch (error) {
    reporter?.stop();
    if (controller.signal.aborted) {
      process.stderr.write('Cancelled: no outputs written\n');
      return 130;
    }
    process.stderr.write(`${oneLine(error)}\n`);
    return 1;
  } finally {
    process.off('SIGINT', onSigint);
  }
}

/** Several images: one joint fit (engine/joint). */
async function runJoint(images: string[], options: CliOptions): Promise<number> {
  const controller = new AbortController();
  const onSigint = () => controller.abort();
  process.once('SIGINT', onSigint);
  let reporter: ReturnType<typeof progressReporter> | null = null;
  try {
    const formats = parseOutputFormats(options.formats);
    if (formats.quicklook) throw new Error('The quick-look picture (png) is not made for joint fits yet');
    const settings = options.settings ? await readSettingsFile(options.settings) : {};
    const perImage = images.map((_, i) => ({
      likelihood: valueFor(options.likelihood, i + 1, false),
      noiseSigma: valueFor(options.sigma, i + 1, i === 0),
      psf: valueFor(options.psfFwhm, i + 1, i === 0),
      unit: valueFor(options.unit, i + 1, true),
    }));
    const everyLikelihood = valueFor(options.likelihood, 0, true);
    if (everyLikelihood) settings.likelihood = everyLikelihood;
    const maxIterations = typeof settings.maxIterations === 'number' ? settings.maxIterations : 300;
    reporter = progressReporter(maxIterations);
    const update = reporter.update;
    const summary = await runJointSeparation({
      imagePaths: images,
      outDir: options.out,
      settings,
      perImage,
      scalePriorWidth: options.scalePrior,
      plane: options.plane,
      formats: formats.catalogue,
      softwareVersion,
      onProgress: (p) => update({ ...p, phase: 'fit' }),
      signal: controller.signal,
    });
    reporter.stop();
    const r = summary.result;
    const scales = r.images
      .slice(1)
      .map((im, i) => `c${i + 2} = ${im.scale.value.toFixed(4)} ± ${im.scale.error.toFixed(4)}`)
      .join(', ');
    process.stderr.write(
      `Joint fit of ${images.length} images: ${r.catalogue.length} sources; ${scales}; ${r.iterations} iterations, ` +
        `${summary.wallTimeSeconds.toFixed(1)} s${r.converged ? '' : ' (not converged)'}; wrote ${summary.files.length} files to ${options.out}\n`,
    );
    return 0;
  } catch (error) {
    reporter?.stop();
    if (controller.signal.aborted) {
      process.stderr.write('Cancelled: no outputs written\n');
      return 130;
    }
    process.stderr.write(`${oneLine(error)}\n`);
    return 1;
  } finally {
    process.off('SIGINT', onSigint);
  }
}

if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  process.exitCode = await main(process.argv.slice(2));
}
