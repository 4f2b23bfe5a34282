/**
 * Pyramid passes shared by two threads: the caller and a helper thread (src/metrics/split.ts)
 * both run the same kernel, taking output slices (or sheets) from one shared counter until
 * none is left, so the split balances itself and a helper that starts late simply takes fewer.
 * Every array a kernel touches lives on a SharedArrayBuffer.
 *
 * Control block (Int32Array, 2 slots): [0] the next slice to hand out, [1] 1 while the helper
 * works on the task. The caller, once the counter has run out, waits until slot 1 is 0: a
 * helper that had not yet begun then finds nothing left and leaves without touching any array.
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Dims } from "../image/volume.js";
import { type BlockFactors, blockMeanPart, type TrackedPart } from "./blocks.js";
import { type GaussianKind, planeSmoother, smoothAlongK } from "./gaussian.js";

/** In-plane smoothing fused into a block reduction (see planeSmoother). */
export interface PlaneSmoothing {
  nx: number;
  ny: number;
  sigmaX: number;
  sigmaY: number;
  truncate: number;
  gauss: GaussianKind;
}

/** A kernel both threads run. */
export type SharedKernel =
  | {
      kind: "block-mean";
      control: Int32Array;
      out: Float32Array;
      data: VoxelArray;
      dims: Dims;
      factors: BlockFactors;
      /** Track voxels >= this (+Infinity: none). */
      threshold: number;
      smoothing: PlaneSmoothing | undefined;
      /** The helper's tracked part (7 slots, see TrackedPart), set to an empty part by the caller. */
      helperPart: Int32Array;
    }
  | {
      kind: "smooth-k";
      control: Int32Array;
      out: Float32Array;
      data: Float32Array;
      dims: Dims;
      sigma: number;
      truncate: number;
      gauss: GaussianKind;
    };

/** Runs a kernel on a helper thread alongside the caller; the returned function waits for it. */
export interface WorkSharer {
  share(task: SharedKernel): () => void;
}

/** A fresh control block. */
export function newControl(): Int32Array {
  return new Int32Array(new SharedArrayBuffer(8));
}

/** A shared int32 array (the helper's tracked part). */
export function sharedInts(n: number): Int32Array {
  return new Int32Array(new SharedArrayBuffer(4 * n));
}

/** The caller's or the helper's share of a kernel; block-mean returns the share's tracked part. */
export function runShare(task: SharedKernel): TrackedPart | undefined {
  if (task.kind === "block-mean") {
    const s = task.smoothing;
    const hook = s ? planeSmoother(s.nx, s.ny, s.sigmaX, s.sigmaY, s.truncate, s.gauss) : undefined;
    return blockMeanPart(task.out, task.data, task.dims, task.factors, task.threshold, hook, task.control);
  }
  smoothAlongK(task.out, task.data, task.dims, task.sigma, task.truncate, task.gauss, task.control);
  return undefined;
}

/** Helper side: run the share, publish its part, then leave the task. */
export function runHelperShare(task: SharedKernel): void {
  Atomics.store(task.control, 1, 1);
  try {
    const part = runShare(task);
    // Only a part that found something is published: the caller starts from an empty part, and
    // a helper that came too late (nothing left to claim) must not write after the caller read.
    if (part && part[0] > 0 && task.kind === "block-mean") task.helperPart.set(part);
  } finally {
    Atomics.store(task.control, 1, 0);
    Atomics.notify(task.control, 1);
  }
}

/**
 * Caller side, after its own share: wait until the helper has left the task.
 * @param failed - returns the helper thread's error, if it died
 */
export function waitForHelper(control: Int32Array, failed: () => Error | undefined): void {
  const t0 = Date.now();
  while (Atomics.load(control, 1) !== 0) {
    Atomics.wait(control, 1, 1, 100);
    const err = failed();
    if (err) throw new CoxaError("WORKER_FAILED", `pyramid helper thread failed: ${err.message}`);
    if (Date.now() - t0 > 60_000)
      throw new CoxaError("WORKER_FAILED", "pyramid helper thread did not finish");
  }
  const err = failed();
  if (err) throw new CoxaError("WORKER_FAILED", `pyramid helper thread failed: ${err.message}`);
}
