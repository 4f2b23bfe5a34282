/**
 * Starting transforms (fixed world -> moving world, design.md) before the pyramid starts:
 *  - header: the identity, i.e. the world coordinates as the files store them;
 *  - centroid: the translation that maps the fixed body-mask centroid onto the moving one;
 *  - moments: centroids plus the rotation between the principal axes of the two body masks
 *    (eigenvectors of the covariance), signs fixed by the third central moment along each axis
 *    (the heavier tail points the positive way) and a proper rotation enforced;
 *  - landmarks: the least-squares rigid (or, for similarity/affine models, similarity) fit of
 *    Umeyama (1991) from the paired landmarks, reflection-safe (src/geometry/pointset.ts).
 */
import { CoxaError } from "../common/errors.js";
import type { LandmarkPairs } from "../geometry/landmarks.js";
import { identity, type Mat4, translation } from "../geometry/mat4.js";
import { fitPointSets } from "../geometry/pointset.js";
import { symmetricEigen } from "../geometry/symmetric-eigen.js";
import type { TransformModel } from "../geometry/transform-model.js";
import type { MaskMoments } from "./regions.js";

export type InitMethod = "centroid" | "moments" | "header" | "landmarks";

export const INIT_METHODS: readonly InitMethod[] = ["centroid", "moments", "header", "landmarks"];

/** What the initialiser needs to know. */
export interface InitContext {
  fixedBody: MaskMoments;
  movingBody: MaskMoments;
  landmarks?: LandmarkPairs;
  model: TransformModel;
}

/** A starting transform and one sentence on how it was found. */
export interface InitialTransform {
  method: InitMethod;
  matrix: Mat4;
  note: string;
}

/**
 * The starting transform for `method`.
 * @throws CoxaError BAD_ARGUMENT for `landmarks` without landmark pairs; BAD_LANDMARKS for
 *   degenerate landmarks; NO_OVERLAP when a body mask is empty
 */
export function initialTransform(method: InitMethod, ctx: InitContext): InitialTransform {
  if (method === "header")
    return { method, matrix: identity(), note: "world coordinates as stored in the headers" };
  if (method === "landmarks") {
    if (!ctx.landmarks)
      throw new CoxaError("BAD_ARGUMENT", "--init landmarks needs --fixed-landmarks and --moving-landmarks");
    const fit = fitPointSets(ctx.landmarks.fixedMm, ctx.landmarks.movingMm, {
      withScale: ctx.model !== "rigid",
    });
    return {
      method,
      matrix: fit.matrix,
      note: `least-squares fit to ${ctx.landmarks.labels.length} landmark pairs (FRE ${fit.freMm.toFixed(2)} mm)`,
    };
  }
  const f = ctx.fixedBody;
  const m = ctx.movingBody;
  if (f.count === 0 || m.count === 0) {
    throw new CoxaError(
      "NO_OVERLAP",
      `the ${f.count === 0 ? "fixed" : "moving"} image has no body voxels to initialise from`,
    );
  }
  if (method === "centroid") {
    const d = [
      m.centroidMm[0] - f.centroidMm[0],
      m.centroidMm[1] - f.centroidMm[1],
      m.centroidMm[2] - f.centroidMm[2],
    ];
    return {
      method,
      matrix: translation(d[0], d[1], d[2]),
      note: `body centroids ${Math.hypot(d[0], d[1], d[2]).toFixed(1)} mm apart`,
    };
  }
  const vf = principalAxes(f);
  const vm = principalAxes(m);
  // R = Vm · Vf^T maps fixed principal axes onto moving ones.
  const out = identity();
  for (let r = 0; r < 3; r++) {
    for (let c = 0; c < 3; c++) {
      let s = 0;
      for (let k = 0; k < 3; k++) s += vm[r * 3 + k] * vf[c * 3 + k];
      out[r * 4 + c] = s;
    }
  }
  for (let r = 0; r < 3; r++) {
    out[r * 4 + 3] =
      m.centroidMm[r] -
      (out[r * 4] * f.centroidMm[0] + out[r * 4 + 1] * f.centroidMm[1] + out[r * 4 + 2] * f.centroidMm[2]);
  }
  return { method, matrix: out, note: "body centroids and principal axes" };
}

/**
 * Principal axes as the columns of a proper rotation (3x3 row-major): eigenvectors of the
 * covariance by decreasing eigenvalue, each signed so that the third central moment of the
 * mask along it is >= 0, the last flipped if needed so that the determinant is +1.
 */
function principalAxes(mm: MaskMoments): Float64Array {
  const values = new Float64Array(3);
  const vectors = new Float64Array(9);
  symmetricEigen(mm.covariance, 3, values, vectors);
  const order = [0, 1, 2].sort((a, b) => values[b] - values[a]);
  const v = new Float64Array(9);
  for (let c = 0; c < 3; c++) for (let r = 0; r < 3; r++) v[r * 3 + c] = vectors[r * 3 + order[c]];
  // Projected third moment along axis u: sum_abc u_a u_b u_c T_abc.
  for (let c = 0; c < 3; c++) {
    let s = 0;
    for (let a = 0; a < 3; a++)
      for (let b = 0; b < 3; b++)
        for (let d = 0; d < 3; d++)
          s += v[a * 3 + c] * v[b * 3 + c] * v[d * 3 + c] * mm.third[a * 9 + b * 3 + d];
    if (s < 0) for (let r = 0; r < 3; r++) v[r * 3 + c] = -v[r * 3 + c];
  }
  const det =
    v[0] * (v[4] * v[8] - v[5] * v[7]) -
    v[1] * (v[3] * v[8] - v[5] * v[6]) +
    v[2] * (v[3] * v[7] - v[4] * v[6]);
  if (det < 0) for (let r = 0; r < 3; r++) v[r * 3 + 2] = -v[r * 3 + 2];
  return v;
}
