/**
 * Orthonormal 2-D discrete Hartley transform on a width × height grid:
 *   H(k) = (1/√N) Σ_x f(x) cas(2π (kx x / width + ky y / height)),  cas θ = cos θ + sin θ,  N = width·height,
 * computed as H(k) = (Re F(k) − Im F(k)) / √N from one real forward FFT (F with the exp(−2πi…) sign), the
 * missing half of F from Hermitian symmetry (R. N. Bracewell, "The Hartley Transform", Oxford 1986, ch. 2).
 * The matrix is real, symmetric and orthogonal, so the transform is its own inverse and its own adjoint:
 * the gradient pass of φ = H(A ⊙ ξ) is the same call. Output layout = input layout (row-major, x fastest).
 */
import { asFloat64, checkLength } from './check-size';
import { transformFor } from './real-fft-2d';
import { scratchSpectrum } from './shared-buffers';
import type { RealArray, RealFft2d, TransformOptions } from './types';

export interface Hartley2d {
  readonly width: number;
  readonly height: number;
  readonly implementation: string;
  /** output = H(input); both width·height row-major (output may be input). `shift`: as for
   *  Convolver.apply (float32 fused path only). */
  transform(input: RealArray, output: RealArray, shift?: number): void;
  dispose(): void;
}

export function createHartley2d(width: number, height: number, options: TransformOptions = {}): Hartley2d {
  const fft = transformFor(width, height, options);
  return new Hartley2dFromFft(fft, options.fft === undefined);
}

class Hartley2dFromFft implements Hartley2d {
  readonly width: number;
  readonly height: number;
  readonly implementation: string;

  constructor(
    private readonly fft: RealFft2d,
    private readonly ownsFft: boolean,
  ) {
    this.width = fft.width;
    this.height = fft.height;
    this.implementation = fft.implementation;
  }

  transform(input: RealArray, output: RealArray, shift?: number): void {
    const { width, height } = this;
    const spectrumWidth = this.fft.spectrumWidth;
    checkLength(input, width * height, 'Hartley input');
    checkLength(output, width * height, 'Hartley output');
    if (this.fft.fused) {
      this.fft.fused.hartley(input, output, shift);
      return;
    }
    const input64 = asFloat64(input, 'this Hartley transform');
    const output64 = asFloat64(output, 'this Hartley transform');
    // the shared scratch spectrum, fetched here so that a transform with fused paths never allocates it
    const { re, im } = scratchSpectrum(this.fft);
    this.fft.forward(input64, re, im);
    const scale = 1 / Math.sqrt(width * height);
    for (let ky = 0; ky < height; ky++) {
      const row = ky * spectrumWidth;
      const out = ky * width;
      const mirror = ((height - ky) % height) * width;
      for (let kx = 0; kx < spectrumWidth; kx++) {
        const r = re[row + kx]!,
          i = im[row + kx]!;
        output64[out + kx] = (r - i) * scale;
        // F(w−kx, h−ky) = conj F(kx, ky), so H there is (Re + Im)/√N.
        if (kx > 0 && width - kx >= spectrumWidth) output64[mirror + width - kx] = (r + i) * scale;
      }
    }
  }

  dispose(): void {
    if (this.ownsFft) this.fft.dispose();
  }
}
