/**
 * Seeded starting poses for stress trials.
 *
 * Conventions: a perturbation P is a rigid map of the FIXED world (RAS+ mm) onto itself,
 * P(x) = R (x - c) + c + t, where R turns by the angle θ about the unit axis u (Rodrigues'
 * rotation formula, R = I + sin θ [u]x + (1 - cos θ) [u]x²) and c is the centre of the error
 * region (the implant). A trial starts from S = T_ref · P, i.e. x_moving = T_ref(P(x_fixed)):
 * the perturbation is applied in fixed world first, then the reference transform.
 *
 * Draws (uniform within the offsets, by magnitude): |t| uniform in [0, offsetMm] and its
 * direction uniform on the unit sphere; θ uniform in [0, offsetDeg] and u uniform on the unit
 * sphere. A direction uniform on the sphere is a normalised triple of standard normals
 * (Muller 1959, "A note on a method for generating points uniformly on n-dimensional spheres",
 * Commun ACM 2:19). Magnitudes (not points in a ball) are drawn uniformly so that small and
 * large offsets are equally represented in the error-against-offset plot.
 *
 * Trial n (1-based) draws from its own generator seeded by `deriveSeed(seed, POSE_STREAM, n)`,
 * so a trial's pose depends only on the seed and n: not on the number of trials, on the
 * severities, or on the mode (the metal mask on and off start from the same pose).
 */
import { Rng } from "../common/random.js";
import { identity, type Mat4, multiply } from "../geometry/mat4.js";

/** One trial's perturbation of the reference. */
export interface Perturbation {
  /** Trial number, 1-based. */
  trial: number;
  /** P as a 4x4 row-major matrix, fixed world -> fixed world. */
  matrix: Mat4;
  /** Translation t, mm. */
  translationMm: [number, number, number];
  /** |t|, mm. */
  offsetMm: number;
  /** Unit rotation axis u (world). */
  rotationAxis: [number, number, number];
  /** Rotation angle θ, degrees. */
  offsetDeg: number;
  /** Centre c of the rotation, world mm. */
  centerMm: [number, number, number];
}

/** Stream tag of derived seeds for the starting poses (see deriveSeed). */
export const POSE_STREAM = 1;
/** Stream tag of derived seeds for each severity's artifacts (see deriveSeed). */
export const ARTIFACT_STREAM = 2;

/**
 * A 32-bit seed derived from a base seed and integer tags by splitmix32-style mixing, so that
 * separate random streams (poses, artifacts per severity) do not overlap.
 * @param seed - base seed (any finite number; folded into 32 bits)
 * @param parts - integer tags
 */
export function deriveSeed(seed: number, ...parts: number[]): number {
  let h = (Math.floor(seed) ^ Math.floor(seed / 4294967296)) | 0;
  for (const part of parts) {
    h = (h + Math.imul((part | 0) + 1, 0x9e3779b9)) | 0;
    h = Math.imul(h ^ (h >>> 16), 0x85ebca6b);
    h = Math.imul(h ^ (h >>> 13), 0xc2b2ae35);
    h ^= h >>> 16;
  }
  return h >>> 0;
}

/**
 * Rotation by `angleDeg` about the unit `axis` (Rodrigues), as the 3x3 block of `out`
 * (translation zero).
 * @param out - destination matrix
 * @param axis - rotation axis (normalised here; must not be zero)
 * @param angleDeg - angle in degrees, right-handed about the axis
 * @returns out
 */
export function axisAngleMatrix(out: Mat4, axis: readonly number[], angleDeg: number): Mat4 {
  const len = Math.hypot(axis[0], axis[1], axis[2]);
  const x = axis[0] / len;
  const y = axis[1] / len;
  const z = axis[2] / len;
  const th = (angleDeg * Math.PI) / 180;
  const c = Math.cos(th);
  const s = Math.sin(th);
  const v = 1 - c;
  out.set(identity());
  out[0] = c + x * x * v;
  out[1] = x * y * v - z * s;
  out[2] = x * z * v + y * s;
  out[4] = y * x * v + z * s;
  out[5] = c + y * y * v;
  out[6] = y * z * v - x * s;
  out[8] = z * x * v - y * s;
  out[9] = z * y * v + x * s;
  out[10] = c + z * z * v;
  return out;
}

function unitDirection(rng: Rng): [number, number, number] {
  for (;;) {
    const a = rng.normal();
    const b = rng.normal();
    const c = rng.normal();
    const len = Math.hypot(a, b, c);
    if (len > 1e-12) return [a / len, b / len, c / len];
  }
}

/**
 * Draw one perturbation (see the module header).
 * @param rng - generator (consumed)
 * @param trial - trial number recorded in the result
 * @param offsetMm - largest translation magnitude, mm (>= 0)
 * @param offsetDeg - largest rotation angle, degrees (>= 0)
 * @param centerMm - rotation centre c, fixed world mm
 */
export function drawPerturbation(
  rng: Rng,
  trial: number,
  offsetMm: number,
  offsetDeg: number,
  centerMm: readonly number[],
): Perturbation {
  const direction = unitDirection(rng);
  const magnitude = rng.range(0, offsetMm);
  const axis = unitDirection(rng);
  const angle = rng.range(0, offsetDeg);
  const t: [number, number, number] = [
    direction[0] * magnitude,
    direction[1] * magnitude,
    direction[2] * magnitude,
  ];
  const m = axisAngleMatrix(new Float64Array(16), axis, angle);
  const [cx, cy, cz] = centerMm;
  m[3] = cx + t[0] - (m[0] * cx + m[1] * cy + m[2] * cz);
  m[7] = cy + t[1] - (m[4] * cx + m[5] * cy + m[6] * cz);
  m[11] = cz + t[2] - (m[8] * cx + m[9] * cy + m[10] * cz);
  return {
    trial,
    matrix: m,
    translationMm: t,
    offsetMm: magnitude,
    rotationAxis: axis,
    offsetDeg: angle,
    centerMm: [cx, cy, cz],
  };
}

/**
 * The perturbations of trials 1..count (each from its own derived generator).
 * @param seed - the run's seed
 * @param count - number of trials (>= 0)
 * @param offsetMm - largest translation magnitude, mm
 * @param offsetDeg - largest rotation angle, degrees
 * @param centerMm - rotation centre, fixed world mm
 */
export function trialPerturbations(
  seed: number,
  count: number,
  offsetMm: number,
  offsetDeg: number,
  centerMm: readonly number[],
): Perturbation[] {
  const out: Perturbation[] = [];
  for (let n = 1; n <= count; n++) {
    out.push(drawPerturbation(new Rng(deriveSeed(seed, POSE_STREAM, n)), n, offsetMm, offsetDeg, centerMm));
  }
  return out;
}

/**
 * A trial's starting transform S = reference · P (fixed world -> moving world).
 * @param reference - fixed-to-moving reference matrix
 * @param perturbation - P, fixed world -> fixed world
 */
export function startTransform(reference: Mat4, perturbation: Mat4): Mat4 {
  return multiply(new Float64Array(16), reference, perturbation);
}
