/** Shared-memory protocol between a split histogram metric and its helper thread (split.ts). */

/** Control block slots (Int32Array). */
export const CMD = 0; // 1 evaluate, 2 leave the loop
export const SEQ = 1; // request counter, bumped by the main thread
export const DONE = 2; // last request the helper finished
export const HELPER_COUNTED = 3; // samples the helper counted
export const READY = 4; // 1 while the helper is in its loop
export const CONTROL_SLOTS = 8;

/** What the helper needs for one metric (arrays on SharedArrayBuffers). */
export interface SplitSetup {
  control: SharedArrayBuffer;
  matrix: SharedArrayBuffer;
  joint: SharedArrayBuffer;
  data: Float32Array;
  bits: Uint8Array | undefined;
  world: Float64Array;
  fixedBin: Int32Array;
  dims: [number, number, number];
  start: number;
  end: number;
  bins: number;
  scale: number;
  offset: number;
  box: boolean;
}
