/**
 * Resampling a moving image onto a target grid (usually the fixed image's).
 *
 * Conventions (design.md): `fixedToMoving` maps a point of the FIXED (target) world to the
 * MOVING world, x_moving = T · x_fixed. For every target voxel centre x the output holds the
 * moving image at T(x). The whole chain target index -> moving index is one affine,
 * moving.worldToIndex · T · target.indexToWorld, stepped incrementally along each output row
 * (src/resample/slab.ts). Where T(x) falls outside the moving image box the output gets
 * `fill` (default 0) — that value is the caller's choice for writing files; the metrics never
 * see it (they test the box themselves).
 *
 * Work is streamed by slabs of output slices and split over worker threads: the moving data
 * (or its B-spline coefficients) and the output live on SharedArrayBuffers, so threads share
 * them without copies. Small jobs run on the calling thread.
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { overlaps, sharedArray, toShared } from "../common/shared-arrays.js";
import { defaultThreads, WorkerPool, workerScript } from "../common/workers.js";
import { isFiniteMat, type Mat4, multiply } from "../geometry/mat4.js";
import { allocate, DATATYPES, type Datatype, datatypeOf, type VoxelArray } from "../image/datatypes.js";
import { type Dims, Volume } from "../image/volume.js";
import { bsplinePrefilter, INTERPS, type Interp } from "./kernels.js";
import { resampleSlab, type SlabJob } from "./slab.js";

/** A grid to resample onto: dimensions and voxel-centre index -> world mm affine. */
export interface TargetGrid {
  dims: Dims;
  indexToWorld: Mat4;
}

/** Options of resampleOnto. */
export interface ResampleOptions {
  /** Interpolation; default "linear". Use "nearest" for labels and masks. */
  interp?: Interp;
  /** Value written where the moving image has no data; default 0. */
  fill?: number;
  /** Output datatype; default the input's for "nearest", float32 otherwise. Integer outputs round and clamp. */
  datatype?: Datatype;
  /** Worker threads; default the machine's parallelism. 1 runs on the calling thread. */
  threads?: number;
  /** Progress of the "resample" stage. */
  onProgress?: ProgressFn;
  /**
   * Output array to fill (length = target voxel count, any datatype); may be the moving data
   * itself: the moving data are read from a copy then.
   */
  out?: VoxelArray;
  /** Jobs smaller than this many output voxels run on the calling thread; default 2,000,000. */
  minParallelVoxels?: number;
  /**
   * Worker pool from createResamplePool, to reuse threads across calls (or start them early,
   * while other work runs); the caller closes it. Default: a pool per call.
   */
  pool?: WorkerPool;
}

/**
 * Worker threads for resampleOnto, to pass as `options.pool` (close with `pool.close()`).
 * @param threads - number of threads; default the machine's parallelism
 */
export function createResamplePool(threads = defaultThreads()): WorkerPool {
  return new WorkerPool(workerScript(import.meta.url, "resample-worker"), Math.max(1, Math.floor(threads)));
}

/** Result of a resampling: the volume and the share of output voxels that received data. */
export interface ResampleResult {
  volume: Volume;
  /** Output voxels inside the moving image box / all output voxels (0..1). */
  insideFraction: number;
}

/**
 * Target-index -> moving-index affine (12 numbers, rows of the 3x4 block), with entries within
 * 1e-9 of an integer snapped to it so that identity and integer-voxel shifts are exact.
 * @param moving - the image that is sampled
 * @param target - the output grid
 * @param fixedToMoving - target world -> moving world (mm)
 */
export function targetToMovingIndex(moving: Volume, target: TargetGrid, fixedToMoving: Mat4): Float64Array {
  const tmp = new Float64Array(16);
  multiply(tmp, fixedToMoving, target.indexToWorld);
  multiply(tmp, moving.worldToIndex, tmp);
  const out = new Float64Array(12);
  for (let q = 0; q < 12; q++) {
    const v = tmp[q];
    const r = Math.round(v);
    out[q] = Math.abs(v - r) < 1e-9 ? r + 0 : v; // + 0 turns -0 into 0
  }
  return out;
}

function prepare(moving: Volume, target: TargetGrid, fixedToMoving: Mat4, options: ResampleOptions) {
  const interp = options.interp ?? "linear";
  if (!INTERPS.includes(interp)) {
    throw new CoxaError("BAD_ARGUMENT", `unknown interpolation "${interp}" (use ${INTERPS.join(", ")})`);
  }
  if (!isFiniteMat(fixedToMoving)) {
    throw new CoxaError("BAD_TRANSFORM", "transform has non-finite entries");
  }
  const [ox, oy, oz] = target.dims;
  if (!(ox >= 1 && oy >= 1 && oz >= 1 && Number.isInteger(ox * oy * oz))) {
    throw new CoxaError("BAD_DIMS", `target grid ${target.dims.join("x")} is not a positive integer size`);
  }
  const fill = options.fill ?? 0;
  if (!Number.isFinite(fill) && !Number.isNaN(fill)) {
    throw new CoxaError("BAD_ARGUMENT", `fill value ${fill} is not finite`);
  }
  const inputType = moving.datatype;
  const outDatatype = options.datatype ?? (interp === "nearest" ? inputType : "float32");
  if (!(outDatatype in DATATYPES)) throw new CoxaError("BAD_ARGUMENT", `unknown datatype "${outDatatype}"`);
  const info = DATATYPES[outDatatype];
  if (options.out && options.out.length !== ox * oy * oz) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `output array has ${options.out.length} voxels, the target grid ${ox * oy * oz}`,
    );
  }
  return { interp, fill, outDatatype: options.out ? datatypeOf(options.out) : outDatatype, info };
}

/**
 * Resample `moving` onto `target` on the calling thread.
 * @param moving - image to sample (any datatype), its own world geometry
 * @param target - output grid (dims, voxel index -> world mm)
 * @param fixedToMoving - target (fixed) world -> moving world, mm (row-major Mat4)
 * @param options - interpolation, fill, datatype, out (threads are ignored here)
 * @throws CoxaError BAD_ARGUMENT (interp, fill, out size), BAD_TRANSFORM (non-finite T), BAD_DIMS
 */
export function resampleOntoSync(
  moving: Volume,
  target: TargetGrid,
  fixedToMoving: Mat4,
  options: ResampleOptions = {},
): ResampleResult {
  const { interp, fill, outDatatype, info } = prepare(moving, target, fixedToMoving, options);
  const n = target.dims[0] * target.dims[1] * target.dims[2];
  const out = options.out ?? allocate(outDatatype, n);
  let src: VoxelArray = moving.data;
  if (interp === "cubic") {
    src = bsplinePrefilter(new Float64Array(moving.count), moving.data, moving.dims);
  } else if (overlaps(out, moving.data)) {
    src = moving.data.slice();
  }
  const job: SlabJob = {
    interp,
    src,
    srcDims: moving.dims,
    out,
    outDims: target.dims,
    outToSrc: targetToMovingIndex(moving, target, fixedToMoving),
    k0: 0,
    k1: 0,
    fill,
    outInteger: info.integer,
    outMin: info.min,
    outMax: info.max,
  };
  let inside = 0;
  const nz = target.dims[2];
  const slab = Math.max(1, Math.ceil(nz / 16));
  for (let k = 0; k < nz; k += slab) {
    job.k0 = k;
    job.k1 = Math.min(nz, k + slab);
    inside += resampleSlab(job);
    options.onProgress?.({ stage: "resample", fraction: job.k1 / nz });
  }
  return { volume: new Volume(target.dims, out, target.indexToWorld), insideFraction: inside / n };
}

/** A task for the resampling worker: a slab job whose arrays are shared. */
export interface WorkerSlabTask {
  kind: "slab";
  job: Omit<SlabJob, "src" | "out"> & {
    src: { buffer: SharedArrayBuffer; datatype: Datatype; length: number };
    out: { buffer: SharedArrayBuffer; datatype: Datatype; length: number };
  };
}

/** A prefilter task for the worker (passes along i and j over slices, or along k over rows). */
export interface WorkerPrefilterTask {
  kind: "prefilter";
  coeffs: { buffer: SharedArrayBuffer; length: number };
  dims: [number, number, number];
  axes: (0 | 1 | 2)[];
  kRange?: [number, number];
  jRange?: [number, number];
}

/**
 * Resample `moving` onto `target`, split over worker threads for large grids.
 * @param moving - image to sample (any datatype), its own world geometry
 * @param target - output grid (dims, voxel index -> world mm)
 * @param fixedToMoving - target (fixed) world -> moving world, mm (row-major Mat4)
 * @param options - interpolation, fill, datatype, threads, onProgress, out
 * @returns the resampled volume on the target grid (its data on a SharedArrayBuffer when threads were used)
 * @throws CoxaError BAD_ARGUMENT, BAD_TRANSFORM, BAD_DIMS; WORKER_FAILED when a thread dies
 */
export async function resampleOnto(
  moving: Volume,
  target: TargetGrid,
  fixedToMoving: Mat4,
  options: ResampleOptions = {},
): Promise<ResampleResult> {
  const n = target.dims[0] * target.dims[1] * target.dims[2];
  const threads = options.pool
    ? options.pool.size
    : Math.max(1, Math.floor(options.threads ?? defaultThreads()));
  if (threads === 1 || n < (options.minParallelVoxels ?? 2_000_000)) {
    return resampleOntoSync(moving, target, fixedToMoving, options);
  }
  const { interp, fill, outDatatype, info } = prepare(moving, target, fixedToMoving, options);
  const pool = options.pool ?? createResamplePool(threads);
  try {
    let srcShared: VoxelArray;
    let srcDatatype: Datatype;
    if (interp === "cubic") {
      srcShared = sharedArray("float64", moving.count);
      srcDatatype = "float64";
      (srcShared as Float64Array).set(moving.data as never);
      await prefilterParallel(pool, srcShared as Float64Array, moving.dims, threads);
    } else {
      srcDatatype = moving.datatype;
      srcShared = toShared(moving.data, srcDatatype);
      if (options.out && overlaps(options.out, srcShared))
        srcShared = toShared(moving.data.slice(), srcDatatype);
    }
    const outShared = sharedArray(outDatatype, n);
    const outToSrc = Array.from(targetToMovingIndex(moving, target, fixedToMoving));
    // One task per thread, each taking every threads-th slice (interleaved, so that the parts
    // of the grid the source does not cover are shared out evenly): every task is posted at
    // once, so the threads work through even while the main thread is busy elsewhere.
    const nz = target.dims[2];
    const tasks: Promise<number>[] = [];
    let done = 0;
    for (let t = 0; t < Math.min(threads, nz); t++) {
      const share = Math.ceil((nz - t) / threads);
      const task: WorkerSlabTask = {
        kind: "slab",
        job: {
          interp,
          src: {
            buffer: srcShared.buffer as SharedArrayBuffer,
            datatype: srcDatatype,
            length: srcShared.length,
          },
          srcDims: [moving.dims[0], moving.dims[1], moving.dims[2]],
          out: { buffer: outShared.buffer as SharedArrayBuffer, datatype: outDatatype, length: n },
          outDims: [target.dims[0], target.dims[1], target.dims[2]],
          outToSrc,
          k0: t,
          k1: nz,
          kStep: threads,
          fill,
          outInteger: info.integer,
          outMin: info.min,
          outMax: info.max,
        },
      };
      tasks.push(
        pool.run<number>(task).then((inside) => {
          done += share;
          options.onProgress?.({ stage: "resample", fraction: done / nz });
          return inside;
        }),
      );
    }
    const inside = (await Promise.all(tasks)).reduce((a, b) => a + b, 0);
    let out: VoxelArray = outShared;
    if (options.out) {
      options.out.set(outShared as never);
      out = options.out;
    }
    return { volume: new Volume(target.dims, out, target.indexToWorld), insideFraction: inside / n };
  } finally {
    if (!options.pool) await pool.close();
  }
}

async function prefilterParallel(
  pool: WorkerPool,
  coeffs: Float64Array,
  dims: Dims,
  threads: number,
): Promise<void> {
  const [, ny, nz] = dims;
  const d: [number, number, number] = [dims[0], dims[1], dims[2]];
  const base = {
    kind: "prefilter" as const,
    coeffs: { buffer: coeffs.buffer as SharedArrayBuffer, length: coeffs.length },
    dims: d,
  };
  const parts = (total: number) => {
    const step = Math.max(1, Math.ceil(total / (threads * 2)));
    const ranges: [number, number][] = [];
    for (let s = 0; s < total; s += step) ranges.push([s, Math.min(total, s + step)]);
    return ranges;
  };
  await Promise.all(
    parts(nz).map((kRange) => pool.run({ ...base, axes: [0, 1], kRange } satisfies WorkerPrefilterTask)),
  );
  await Promise.all(
    parts(ny).map((jRange) => pool.run({ ...base, axes: [2], jRange } satisfies WorkerPrefilterTask)),
  );
}
