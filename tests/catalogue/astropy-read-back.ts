/* eslint-disable @typescript-eslint/no-explicit-any -- astropy's JSON is checked field by field in the tests */
/**
 * Runs the committed astropy read-back script (tests/fixtures/astropy/catalogue/read_back.py) with Debian's
 * /usr/bin/python3 and returns what astropy read, as parsed JSON.
 */
import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';

export const READ_BACK_SCRIPT = fileURLToPath(
  new URL('../fixtures/astropy/catalogue/read_back.py', import.meta.url),
);

export function readBackWithAstropy(files: {
  csv?: string;
  votable?: string;
  fits?: string;
}): Record<string, any> {
  const args = [READ_BACK_SCRIPT];
  for (const [kind, path] of Object.entries(files)) if (path) args.push(`--${kind}`, path);
  const output = execFileSync('/usr/bin/python3', args, { encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  return JSON.parse(output) as Record<string, any>;
}
