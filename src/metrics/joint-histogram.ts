/**
 * The joint-histogram accumulation shared by the histogram metrics (metric.ts) and their helper
 * thread (split-worker.ts). The trilinear interpolation is written out inline here, as in the LNCC
 * loop and src/resample/slab.ts, on purpose: a call per sample costs more than the arithmetic.
 * Conventions as in metric.ts: `m` maps fixed WORLD mm to MOVING voxel
 * index (row-major 4x4); the moving mask is a bitset (bit q & 7 of byte q >> 3).
 */

/**
 * The hot loop of the histogram metrics, kept in its own small function so that the optimising
 * compiler sees all of it (a long loop inside a larger method was compiled before the code after
 * it had run, and deoptimised there on every call). Maps each sample through `m` (fixed world ->
 * moving voxel index), interpolates the moving image trilinearly and adds the sample to the joint
 * histogram (box or cubic B-spline Parzen window), for samples start..end-1. `joint` is cleared
 * first. Returns the number of samples counted.
 */
export function accumulateJoint(
  joint: Float64Array,
  fixedBin: Int32Array,
  bins: number,
  scale: number,
  offset: number,
  box: boolean,
  world: Float64Array,
  start: number,
  end: number,
  data: Float32Array,
  bits: Uint8Array | undefined,
  nx: number,
  ny: number,
  nz: number,
  m: Float64Array,
): number {
  const m00 = m[0];
  const m01 = m[1];
  const m02 = m[2];
  const m03 = m[3];
  const m10 = m[4];
  const m11 = m[5];
  const m12 = m[6];
  const m13 = m[7];
  const m20 = m[8];
  const m21 = m[9];
  const m22 = m[10];
  const m23 = m[11];
  const nxy = nx * ny;
  const xmax = nx - 1;
  const ymax = ny - 1;
  const zmax = nz - 1;
  const bx = nx - 0.5;
  const by = ny - 0.5;
  const bz = nz - 0.5;
  const lastPos = bins - 3;
  joint.fill(0);
  let counted = 0;
  for (let s = start; s < end; s++) {
    const x = world[3 * s];
    const y = world[3 * s + 1];
    const z = world[3 * s + 2];
    let u = m00 * x + m01 * y + m02 * z + m03;
    let v = m10 * x + m11 * y + m12 * z + m13;
    let w = m20 * x + m21 * y + m22 * z + m23;
    if (!(u >= -0.5 && u <= bx && v >= -0.5 && v <= by && w >= -0.5 && w <= bz)) continue;
    if (bits !== undefined) {
      let ri = (u + 0.5) | 0;
      let rj = (v + 0.5) | 0;
      let rk = (w + 0.5) | 0;
      if (ri > xmax) ri = xmax;
      if (rj > ymax) rj = ymax;
      if (rk > zmax) rk = zmax;
      const q = ri + nx * rj + nxy * rk;
      if ((bits[q >> 3] & (1 << (q & 7))) === 0) continue;
    }
    u = u < 0 ? 0 : u > xmax ? xmax : u;
    v = v < 0 ? 0 : v > ymax ? ymax : v;
    w = w < 0 ? 0 : w > zmax ? zmax : w;
    const i = u | 0;
    const j = v | 0;
    const k = w | 0;
    const fx = u - i;
    const fy = v - j;
    const fz = w - k;
    const o = i + nx * j + nxy * k;
    const sx = i < xmax ? 1 : 0;
    const sy = j < ymax ? nx : 0;
    const sz = k < zmax ? nxy : 0;
    const a = data[o];
    const b = data[o + sy];
    const c = data[o + sz];
    const d = data[o + sz + sy];
    const c00 = a + fx * (data[o + sx] - a);
    const c10 = b + fx * (data[o + sy + sx] - b);
    const c01 = c + fx * (data[o + sz + sx] - c);
    const c11 = d + fx * (data[o + sz + sy + sx] - d);
    const e = c00 + fy * (c10 - c00);
    const val = e + fz * (c01 + fy * (c11 - c01) - e);
    if (val !== val) continue;
    counted++;
    const row = fixedBin[s] * bins;
    if (box) {
      let bin = Math.floor(val * scale + offset);
      bin = bin < 0 ? 0 : bin >= bins ? bins - 1 : bin;
      joint[row + bin] += 1;
    } else {
      let t = val * scale + offset;
      t = t < 2 ? 2 : t > lastPos ? lastPos : t;
      const t0 = t | 0;
      const f = t - t0;
      const g = 1 - f;
      const o0 = row + t0;
      // Cubic B-spline weights of bins t0-1 .. t0+2 (they sum to 1).
      joint[o0 - 1] += (g * g * g) / 6;
      joint[o0] += (4 - 6 * f * f + 3 * f * f * f) / 6;
      joint[o0 + 1] += (4 - 6 * g * g + 3 * g * g * g) / 6;
      joint[o0 + 2] += (f * f * f) / 6;
    }
  }
  return counted;
}
