/**
 * kernels.wat → WASM bytes (base64) with wabt, for scripts/build-kernels.ts and the test that checks the
 * committed binary against its source. Not imported by the engine at run time (wabt is a devDependency).
 */
export async function assembleKernels(wat: string): Promise<string> {
  const wabt = await (await import('wabt')).default();
  const parsed = wabt.parseWat('kernels.wat', wat, { simd: true });
  try {
    parsed.validate();
    return Buffer.from(parsed.toBinary({}).buffer).toString('base64');
  } finally {
    parsed.destroy();
  }
}
