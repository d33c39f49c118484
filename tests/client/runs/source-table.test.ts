import { afterEach, describe, expect, it } from 'vitest';
import { flushPromises, mount, type VueWrapper } from '@vue/test-utils';
import { Quasar } from 'quasar';

import SourceTable from '@/components/runs/SourceTable.vue';
import { mockApi, type MockRequest } from '../support/api-mock';
import { settle } from '../support/mount';
import { makeSource } from './runs-support';

let wrapper: VueWrapper | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

// 60 invented sources; the mock answers the requested page of them.
const all = Array.from({ length: 60 }, (_, k) =>
  makeSource({ id: k + 1, snr: 60 - k, flux: (60 - k) / 1000 }),
);
function page(request: MockRequest) {
  const number = Number(request.query.get('page'));
  const size = Number(request.query.get('pageSize'));
  return {
    body: {
      sources: all.slice((number - 1) * size, number * size),
      page: number,
      pageSize: size,
      total: 60,
      caution: 'c',
    },
  };
}

async function mountTable() {
  const api = mockApi({ 'GET /api/runs/:id/sources': page });
  wrapper = mount(SourceTable, {
    attachTo: document.body,
    props: { runId: 42 },
    global: { plugins: [Quasar] },
  });
  await flushPromises();
  return api;
}

describe('SourceTable', () => {
  it('asks the server for sorted, filtered pages and emits the row chosen', async () => {
    const api = await mountTable();
    const first = api.callsTo('GET /api/runs/:id/sources')[0]!.query;
    expect(Object.fromEntries(first)).toEqual({ page: '1', pageSize: '25', sort: '-snr' });
    expect(wrapper!.findAll('tbody tr')).toHaveLength(25);

    await wrapper!.get('input[data-test="filter-min-snr"]').setValue('6');
    await wrapper!.get('input[data-test="filter-max-flux"]').setValue('0.05');
    await wrapper!.get('form').trigger('submit');
    await settle();
    const filtered = api.callsTo('GET /api/runs/:id/sources').at(-1)!.query;
    expect(filtered.get('minSnr')).toBe('6');
    expect(filtered.get('maxFlux')).toBe('0.05');
    expect(filtered.get('page')).toBe('1');
    expect(wrapper!.emitted('query')?.at(-1)?.[0]).toMatchObject({ minSnr: 6, maxFlux: 0.05, sort: '-snr' });

    const header = wrapper!.findAll('thead th').find((node) => node.text().includes('Flux density'));
    await header!.trigger('click');
    await settle();
    expect(api.callsTo('GET /api/runs/:id/sources').at(-1)!.query.get('sort')).toMatch(/^-?fluxDensity$/);

    await wrapper!.findAll('tbody tr')[2]!.trigger('click');
    expect(wrapper!.emitted('select')?.[0]?.[0]).toMatchObject({ id: 3 });
    api.expectNoUnexpectedCalls();
  });

  it('refuses a filter that is not a number without asking the server', async () => {
    const api = await mountTable();
    await wrapper!.get('input[data-test="filter-min-flux"]').setValue('bright');
    await wrapper!.get('form').trigger('submit');
    await settle();
    expect(wrapper!.text()).toContain('Minimum flux must be a number.');
    expect(api.callsTo('GET /api/runs/:id/sources')).toHaveLength(1);
  });
});
