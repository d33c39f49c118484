/**
 * A small in-process cache of encoded pixel views, least recently used out first, bounded in bytes. Image
 * content never changes under an id, so an entry keyed by image id, content hash and size stays valid; access is
 * checked by the route before the cache is consulted. Each server process has its own cache.
 */
export class ViewCache {
  private readonly entries = new Map<string, Uint8Array>();
  private bytes = 0;

  constructor(private readonly maxBytes: number) {}

  get(key: string): Uint8Array | undefined {
    const value = this.entries.get(key);
    if (value) {
      // Re-insert: Map keeps insertion order, so the first key is the least recently used.
      this.entries.delete(key);
      this.entries.set(key, value);
    }
    return value;
  }

  set(key: string, value: Uint8Array): void {
    if (value.byteLength > this.maxBytes) return;
    const previous = this.entries.get(key);
    if (previous) {
      this.entries.delete(key);
      this.bytes -= previous.byteLength;
    }
    this.entries.set(key, value);
    this.bytes += value.byteLength;
    for (const [oldest, entry] of this.entries) {
      if (this.bytes <= this.maxBytes) break;
      this.entries.delete(oldest);
      this.bytes -= entry.byteLength;
    }
  }

  get size(): number {
    return this.entries.size;
  }

  get byteSize(): number {
    return this.bytes;
  }
}
