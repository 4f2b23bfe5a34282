/**
 * Clipping a line against an interval, one coordinate at a time: along a grid row the mapped
 * position moves linearly (p0 + t * d), so the part of the row inside a box is found in closed
 * form instead of by testing every voxel (used by resampling and by the field-of-view masks).
 */

/**
 * Narrow the parameter interval [range[0], range[1]] to the values t where p0 + t * d lies in
 * [lo, hi]. `tolerance` widens the narrowed ends by that share of the largest |t| (at least 1),
 * so that points exactly on a face stay inside despite rounding. An empty result is [1, 0].
 */
export function clipLine(
  range: Float64Array,
  p0: number,
  d: number,
  lo: number,
  hi: number,
  tolerance = 0,
): void {
  if (!(hi >= lo)) {
    range[0] = 1;
    range[1] = 0;
    return;
  }
  if (Math.abs(d) < 1e-12) {
    if (!(p0 >= lo && p0 <= hi)) {
      range[0] = 1;
      range[1] = 0;
    }
    return;
  }
  let t0 = (lo - p0) / d;
  let t1 = (hi - p0) / d;
  if (t0 > t1) {
    const t = t0;
    t0 = t1;
    t1 = t;
  }
  const eps = tolerance * Math.max(1, Math.abs(t0), Math.abs(t1));
  if (t0 - eps > range[0]) range[0] = t0 - eps;
  if (t1 + eps < range[1]) range[1] = t1 + eps;
  if (!(range[0] <= range[1])) {
    range[0] = 1;
    range[1] = 0;
  }
}
