/**
 * Command line: separate one sky image into its diffuse and compact components, with no server or database.
 *
 *   npm run separate -- IMAGE --out DIR [--likelihood gaussian|poisson] [--psf-fwhm MAJ,MIN,PA] [--sigma S]
 *                       [--settings FILE.json] [--plane N] [--formats csv,votable,fits,png]
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
import { runSeparation } from './run-separation';

const softwareVersion = (
  JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string }
).version;

interface CliOptions {
  out: string;
  likelihood?: 'gaussian' | 'poisson';
  psfFwhm?: { fwhmMajor: number; fwhmMinor: number; pa: number };
  sigma?: number;
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

function parsePsfFwhm(text: string): CliOptions['psfFwhm'] {
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
    .addOption(new Option('--likelihood <kind>', 'noise model').choices(['gaussian', 'poisson']))
    .option(
      '--psf-fwhm <maj,min,pa>',
      'Gaussian PSF: FWHM major and minor (pixels), position angle (degrees)',
      parsePsfFwhm,
    )
    .option(
      '--sigma <s>',
      'Gaussian noise σ in image units (estimated from the image when left out)',
      parsePositive('--sigma', false),
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
  if (images.length > 1) {
    process.stderr.write(
      `Joint fitting of several images is not supported yet: give one image (got ${images.length})\n`,
    );
    return 1;
  }

  const controller = new AbortController();
  const onSigint = () => controller.abort();
  process.once('SIGINT', onSigint);
  let reporter: ReturnType<typeof progressReporter> | null = null;
  try {
    const formats = parseOutputFormats(options.formats);
    const settings = options.settings ? await readSettingsFile(options.settings) : {};
    if (options.likelihood) settings.likelihood = options.likelihood;
    if (options.psfFwhm) settings.psf = options.psfFwhm;
    if (options.sigma !== undefined) settings.noiseSigma = options.sigma;
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

if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  process.exitCode = await main(process.argv.slice(2));
}
