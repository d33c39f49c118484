// The part of the WebAssembly JavaScript API that simd/kernels.ts uses: the server's TypeScript library (ES2022
// with Node's types) declares none of it, and the DOM library that does is the client's.
declare namespace WebAssembly {
  class Module {
    constructor(bytes: Uint8Array);
  }
  class Memory {
    constructor(descriptor: { initial: number; maximum?: number });
    readonly buffer: ArrayBuffer;
  }
  class Instance {
    constructor(module: Module, imports: Record<string, Record<string, unknown>>);
    readonly exports: Record<string, unknown>;
  }
}
