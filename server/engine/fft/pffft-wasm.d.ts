/** Types for the parts of @echogarden/pffft-wasm (an Emscripten build of PFFFT) that the FFT layer calls. */
declare module '@echogarden/pffft-wasm/simd' {
  export interface PffftModule {
    HEAPF32: Float32Array;
    _pffft_new_setup(n: number, transform: number): number;
    _pffft_destroy_setup(setup: number): void;
    _pffft_transform_ordered(
      setup: number,
      input: number,
      output: number,
      work: number,
      direction: number,
    ): void;
    _pffft_aligned_malloc(bytes: number): number;
    _pffft_aligned_free(pointer: number): void;
  }
  const factory: () => Promise<PffftModule>;
  export default factory;
}
