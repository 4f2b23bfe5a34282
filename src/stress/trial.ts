/**
 * One stress trial: register the severity's MR to its CT from a given start, with the metal
 * mask on or off, and report what the quality gates need. Plain data in and out, so that a task
 * can run in this thread or in a worker thread (./trial-worker.ts); volumes travel as their grid
 * plus a typed array (a SharedArrayBuffer-backed array is shared with the worker, not copied).
 *
 * Conventions: matrices are 16 numbers row-major; `startMatrix` and the result map FIXED world
 * to MOVING world (RAS+ mm). The inverse-consistency pass is off (it would double the time and
 * is not what a trial measures); everything else is the registration users run
 * (src/register/driver.ts), including the coarse global search unless `globalSearch` is false.
 */
import { CoxaError } from "../common/errors.js";
import type { Mat4 } from "../geometry/mat4.js";
import { describeParameters, type TransformModel } from "../geometry/transform-model.js";
import type { VoxelArray } from "../image/datatypes.js";
import { Volume } from "../image/volume.js";
import type { MetricKind } from "../metrics/metric.js";
import { registerImages } from "../register/driver.js";

/** A volume as plain data. */
export interface VolumeData {
  dims: [number, number, number];
  data: VoxelArray;
  /** Row-major 4x4 voxel-centre index -> world mm. */
  indexToWorld: number[];
}

/** Registration settings shared by every trial of a run. */
export interface TrialRegisterSettings {
  model: TransformModel;
  metric: MetricKind;
  levelsMm: number[];
  metalHu: number;
  metalMarginMm: number;
  globalSearch: boolean;
  seed: number;
}

/** One trial as a task. */
export interface TrialTask {
  fixed: VolumeData;
  moving: VolumeData;
  /** Start transform, 16 numbers row-major, fixed -> moving. */
  startMatrix: number[];
  /** Metal mask on (exclude CT metal and margin from the metric) or off. */
  metalMask: boolean;
  settings: TrialRegisterSettings;
}

/** What a trial returns. */
export interface TrialOutcome {
  /** Result transform, 16 numbers row-major, fixed -> moving (the start when the registration could not run). */
  matrix: number[];
  /** Parameters of the model about `centerMm` (transform-model.ts layout). */
  parameters: number[];
  centerMm: [number, number, number];
  /** Registration wall time, s. */
  seconds: number;
  overlapFraction: number;
  metricStart: number;
  metricFinal: number;
  converged: boolean;
  convergenceReason: string;
  scale: number[];
  runnerUpGap: number | null;
  runnerUpDistanceMm: number | null;
  bestSearchCost: number | null;
  /** Why the registration could not run (bad-input error from the driver), else null. */
  failure: string | null;
}

/** A Volume's plain-data form. */
export function volumeData(v: Volume): VolumeData {
  return { dims: [v.dims[0], v.dims[1], v.dims[2]], data: v.data, indexToWorld: Array.from(v.indexToWorld) };
}

function toVolume(d: VolumeData): Volume {
  return new Volume(d.dims, d.data, Float64Array.from(d.indexToWorld));
}

/**
 * Run one trial.
 * @param task - images, start, mode and settings
 * @returns the result transform and the registration's own measurements; a registration that
 *   stops on bad input (e.g. no overlap from this start) returns the start with `failure` set
 * @throws CoxaError for internal failures
 */
export function runTrial(task: TrialTask): TrialOutcome {
  const fixed = toVolume(task.fixed);
  const moving = toVolume(task.moving);
  const start: Mat4 = Float64Array.from(task.startMatrix);
  const s = task.settings;
  const t0 = performance.now();
  try {
    const reg = registerImages(fixed, moving, {
      model: s.model,
      metric: s.metric,
      levelsMm: s.levelsMm,
      metalMask: task.metalMask,
      metalHu: s.metalHu,
      metalMarginMm: s.metalMarginMm,
      fixedModality: "ct",
      startMatrix: start,
      globalSearch: s.globalSearch,
      inverseConsistency: false,
      seed: s.seed,
    });
    const finest = reg.levels[reg.levels.length - 1];
    return {
      matrix: Array.from(reg.matrix),
      parameters: Array.from(reg.parameters),
      centerMm: reg.centerMm,
      seconds: (performance.now() - t0) / 1000,
      overlapFraction: reg.overlapFraction,
      metricStart: reg.metricStart,
      metricFinal: reg.metricFinal,
      converged: finest.converged,
      convergenceReason: finest.reason,
      scale: describeParameters(reg.model, reg.parameters, reg.centerMm).scale,
      runnerUpGap: reg.search?.runnerUpGap ?? null,
      runnerUpDistanceMm: reg.search?.runnerUpDistanceMm ?? null,
      bestSearchCost: reg.search?.refinedCosts[0] ?? null,
      failure: null,
    };
  } catch (err) {
    if (!(err instanceof CoxaError) || err.exitCode !== 2) throw err;
    const c = fixed.centerWorld();
    return {
      matrix: Array.from(start),
      parameters: [],
      centerMm: c,
      seconds: (performance.now() - t0) / 1000,
      overlapFraction: 0,
      metricStart: 0,
      metricFinal: 0,
      converged: false,
      convergenceReason: "not run",
      scale: [1, 1, 1],
      runnerUpGap: null,
      runnerUpDistanceMm: null,
      bestSearchCost: null,
      failure: err.message,
    };
  }
}
