// @vitest-environment node
import { describe, expect, it } from 'vitest';

import { ViewCache } from '../../../server/images/view-cache';

const bytes = (n: number) => new Uint8Array(n);

describe('ViewCache', () => {
  it('evicts the least recently used entries when over its byte budget', () => {
    const cache = new ViewCache(100);
    cache.set('a', bytes(40));
    cache.set('b', bytes(40));
    expect(cache.get('a')?.byteLength).toBe(40); // a is now the most recently used
    cache.set('c', bytes(40)); // 120 > 100: b goes
    expect(cache.get('b')).toBeUndefined();
    expect(cache.get('a')).toBeDefined();
    expect(cache.get('c')).toBeDefined();
    expect(cache.byteSize).toBe(80);
  });

  it('replaces an entry under the same key and never keeps one larger than the budget', () => {
    const cache = new ViewCache(100);
    cache.set('a', bytes(30));
    cache.set('a', bytes(50));
    expect(cache.byteSize).toBe(50);
    cache.set('huge', bytes(101));
    expect(cache.get('huge')).toBeUndefined();
    expect(cache.size).toBe(1);
  });
});
