/** PSF construction, pixel-integrated stamps and convolution kernels. */
export * from './psf';
export { psfFromImage, PSF_IMAGE_MAX_SIDE } from './psf-from-image';
export { psfStamp, createPsfStamp, psfStampHalfSize, type PsfStamp } from './psf-stamp';
export { psfKernelOnGrid } from './psf-kernel';
export { erfc, normalUpperTail, normalInterval, normalDensity } from './normal-integral';
export { addStampToImage } from './add-stamp';
