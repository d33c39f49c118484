/**
 * Loads the PFFFT WASM module (SIMD build) once per thread, at import time (top-level await), so the FFT
 * constructors can stay synchronous. PFFFT: J. Pommier's single-precision FFT after FFTPACK (BSD licence),
 * lengths 2^a·3^b·5^c with a ≥ 5 for real and a ≥ 4 for complex transforms.
 */
import loadPffft, { type PffftModule } from '@echogarden/pffft-wasm/simd';
import { isSmooth235 } from './good-size';

export const PFFFT_REAL = 0;
export const PFFFT_COMPLEX = 1;
export const PFFFT_FORWARD = 0;
export const PFFFT_BACKWARD = 1;

export const pffft: PffftModule = await loadPffft();

/** True when PFFFT accepts a real (rows) transform of this length. */
export function pffftRealLength(n: number): boolean {
  return n % 32 === 0 && isSmooth235(n);
}

/** True when PFFFT accepts a complex (columns) transform of this length. */
export function pffftComplexLength(n: number): boolean {
  return n % 16 === 0 && isSmooth235(n);
}
