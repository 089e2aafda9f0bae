/**
 * Loading the WebAssembly kernels (kernels/*.ts, AssemblyScript, built by `npm run build:kernels` into
 * kernels/build/). Each kernel is the fast path of a TypeScript function that stays in place: when a kernel cannot be
 * loaded (file missing, no WebAssembly) or is switched off, the TypeScript code runs instead, with the same results.
 *
 * RATCHET_KERNELS=off in the environment switches every kernel off (for comparisons).
 */
import { readFileSync } from 'node:fs';

/** The little of the WebAssembly API used here (TypeScript's lib has it only with the DOM types). */
export interface WasmMemory {
  readonly buffer: ArrayBuffer;
  grow(pages: number): number;
}
export interface WasmGlobal {
  value: number;
}
interface WasmApi {
  Module: new (bytes: Uint8Array) => object;
  Instance: new (module: object, imports: object) => { exports: Record<string, unknown> };
}

const loaded = new Map<string, { exports: unknown } | { error: string }>();
let enabled = process.env.RATCHET_KERNELS !== 'off';

/** The exports of kernels/build/NAME.wasm, or the reason it could not be loaded. Loaded once per thread. */
export function loadKernel<E>(name: string): { exports: E } | { error: string } {
  let k = loaded.get(name);
  if (k === undefined) {
    try {
      const api = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;
      if (api === undefined) throw new Error('this JavaScript engine has no WebAssembly');
      const bytes = readFileSync(new URL(`../../kernels/build/${name}.wasm`, import.meta.url));
      const instance = new api.Instance(new api.Module(bytes), {
        env: {
          abort: () => {
            throw new Error(`kernel ${name}: abort`);
          },
        },
      });
      k = { exports: instance.exports };
    } catch (err) {
      k = { error: (err as Error).message };
    }
    loaded.set(name, k);
  }
  return k as { exports: E } | { error: string };
}

/** Whether kernels are used in this thread. */
export function kernelsEnabled(): boolean {
  return enabled;
}

/** Turn the kernels on or off in this thread (tests compare both paths). Returns the previous state. */
export function setKernels(on: boolean): boolean {
  const was = enabled;
  enabled = on;
  return was;
}

/** Make `memory` at least `bytes` long (whole 64 KiB pages). True when it grew (views on the old buffer are stale). */
export function ensureMemory(memory: WasmMemory, bytes: number): boolean {
  const have = memory.buffer.byteLength;
  if (bytes <= have) return false;
  memory.grow(Math.ceil((bytes - have) / 65536));
  return true;
}
