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
    /** Unordered (PFFFT's internal element order) transform; input and output may be the same. */
    _pffft_transform(setup: number, input: number, output: number, work: number, direction: number): void;
    /** ab += a × b × scaling, complex, on spectra in the internal order of _pffft_transform. */
    _pffft_zconvolve_accumulate(setup: number, a: number, b: number, ab: number, scaling: number): void;
    _pffft_aligned_malloc(bytes: number): number;
    _pffft_aligned_free(pointer: number): void;
  }
  const factory: () => Promise<PffftModule>;
  export default factory;
}
