// @vitest-environment node
/** The command line's --formats: catalogue formats plus png for the quick-look picture. */
import { describe, expect, it } from 'vitest';

import { parseOutputFormats } from '../../../server/cli/separate';

describe('--formats', () => {
  it('takes png beside the catalogue formats, or alone', () => {
    expect(parseOutputFormats('csv,png')).toEqual({ catalogue: ['csv'], quicklook: true });
    expect(parseOutputFormats(' PNG ')).toEqual({ catalogue: [], quicklook: true });
    expect(parseOutputFormats('votable,fits')).toEqual({ catalogue: ['votable', 'fits'], quicklook: false });
  });
  it('names png among the choices when a format is unknown', () => {
    expect(() => parseOutputFormats('csv,jpeg')).toThrow(
      'Unknown catalogue format "jpeg"; use csv, votable or fits (or png for the quick-look picture).',
    );
    expect(() => parseOutputFormats('')).toThrow(
      'Give at least one catalogue format: csv, votable or fits (or png for the quick-look picture).',
    );
  });
});
