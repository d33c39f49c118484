import { afterEach, describe, expect, it } from 'vitest';
import { mount, type VueWrapper } from '@vue/test-utils';
import { QBtnToggle, QSelect, Quasar } from 'quasar';

import type { ReferencePreview } from '@shared/cross-match';
import ColumnMappingForm from '@/components/crossmatch/ColumnMappingForm.vue';
import {
  columnOptions,
  initialChoices,
  mappingProblems,
  mappingToSend,
} from '@/components/crossmatch/column-mapping';

let wrapper: VueWrapper | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

const columns = [
  { name: 'AWS_name', unit: null, ucd: 'meta.id' },
  { name: 'alpha', unit: 'deg', ucd: null },
  { name: 'delta', unit: 'deg', ucd: null },
  { name: 'S_1400', unit: 'mJy', ucd: 'phot.flux.density' },
  { name: 'xpos', unit: null, ucd: null },
  { name: 'ypos', unit: null, ucd: null },
];

describe('column-mapping logic', () => {
  it('asks for both position columns of the chosen kind', () => {
    expect(mappingProblems({}, 'sky')).toEqual([
      'Choose the column for Right ascension (RA).',
      'Choose the column for Declination (Dec).',
    ]);
    expect(mappingProblems({ ra: 'alpha', dec: 'delta' }, 'sky')).toEqual([]);
    // RA/Dec chosen but pixel positions asked for: x and y are still missing.
    expect(mappingProblems({ ra: 'alpha', dec: 'delta' }, 'pixel')).toHaveLength(2);
  });

  it('refuses one column chosen for two quantities', () => {
    expect(mappingProblems({ ra: 'alpha', dec: 'alpha', flux: 'S_1400' }, 'sky')).toEqual([
      'Column «alpha» is chosen for Right ascension (RA) and Declination (Dec); each quantity needs its own column.',
    ]);
  });

  it('sends only the fields of the chosen kind, without empty ones', () => {
    expect(mappingToSend({ ra: 'alpha', dec: 'delta', x: 'xpos', y: 'ypos', flux: '' }, 'pixel')).toEqual({
      x: 'xpos',
      y: 'ypos',
    });
  });

  it('labels columns with their unit and UCD', () => {
    expect(columnOptions(columns)[3]).toEqual({ label: 'S_1400 (mJy, phot.flux.density)', value: 'S_1400' });
    expect(columnOptions(columns)[4]).toEqual({ label: 'xpos', value: 'xpos' });
  });

  it('starts from the mapping the server would use, else its guess', () => {
    const base = {
      fileName: 'f.csv',
      format: 'csv',
      fileBytes: 10,
      columns,
      sampleRows: [],
      notes: [],
      unsure: true,
      rowsRead: 1,
      rowsRejected: 0,
      rejected: [],
      sampleEntries: [],
    } satisfies Partial<ReferencePreview>;
    const used = initialChoices({
      ...base,
      guessedMapping: { id: 'AWS_name' },
      mapping: { ra: 'alpha', dec: 'delta' },
      positions: 'sky',
      problem: null,
    } as ReferencePreview);
    expect(used).toEqual({ mapping: { ra: 'alpha', dec: 'delta' }, positions: 'sky' });
    const guessOnly = initialChoices({
      ...base,
      guessedMapping: { x: 'xpos', y: 'ypos' },
      mapping: null,
      positions: null,
      problem: 'No position columns found',
    } as ReferencePreview);
    expect(guessOnly).toEqual({ mapping: { x: 'xpos', y: 'ypos' }, positions: 'pixel' });
  });
});

describe('ColumnMappingForm', () => {
  function mountForm(mapping = {}, positions: 'sky' | 'pixel' = 'sky') {
    wrapper = mount(ColumnMappingForm, {
      attachTo: document.body,
      props: { columns, modelValue: mapping, positions },
      global: { plugins: [Quasar] },
    });
    return wrapper;
  }

  it('offers a labelled select of the file columns per quantity and lists the problems', () => {
    const form = mountForm();
    const selects = form.findAllComponents(QSelect);
    expect(selects.map((s) => s.props('label'))).toEqual([
      'Right ascension (RA)',
      'Declination (Dec)',
      'Flux or flux density (optional)',
      'Name or id (optional)',
    ]);
    expect((selects[0]!.props('options') as { value: string }[]).map((o) => o.value)).toEqual(
      columns.map((c) => c.name),
    );
    expect(form.get('[data-test="mapping-problems"]').text()).toContain(
      'Choose the column for Right ascension',
    );
  });

  it('emits the new mapping when a column is chosen or cleared', async () => {
    const form = mountForm({ ra: 'alpha', flux: 'S_1400' });
    const selects = form.findAllComponents(QSelect);
    selects[1]!.vm.$emit('update:modelValue', 'delta');
    selects[2]!.vm.$emit('update:modelValue', null);
    const events = form.emitted('update:modelValue')!;
    expect(events[0]).toEqual([{ ra: 'alpha', dec: 'delta', flux: 'S_1400' }]);
    expect(events[1]).toEqual([{ ra: 'alpha' }]);
  });

  it('switches to pixel positions: x and y selects replace RA and Dec', async () => {
    const form = mountForm({ x: 'xpos', y: 'ypos' }, 'pixel');
    expect(form.findAllComponents(QSelect).map((s) => s.props('label'))[0]).toBe('Pixel x (FITS, 1-based)');
    expect(form.find('[data-test="mapping-problems"]').exists()).toBe(false);
    form.findComponent(QBtnToggle).vm.$emit('update:modelValue', 'sky');
    expect(form.emitted('update:positions')).toEqual([['sky']]);
  });
});
