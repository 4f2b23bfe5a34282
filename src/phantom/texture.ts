/**
 * Seeded smooth random texture: 3-D value noise on a periodic lattice of 32^3 random values in
 * [-1, 1], interpolated trilinearly with smoothstep weights (Perlin 1985 describes the family).
 * Coordinates are in lattice cells; callers divide mm by the feature size.
 */
import type { Rng } from "../common/random.js";

/** Lattice side of the value noise (period in cells). */
export const LATTICE = 32;

/** A lattice of LATTICE^3 values in [-1, 1] drawn from `rng`. */
export function makeLattice(rng: Rng): Float32Array {
  const n = LATTICE * LATTICE * LATTICE;
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) out[i] = 2 * rng.uniform() - 1;
  return out;
}

/**
 * Value noise at (x, y, z) lattice cells, in [-1, 1].
 * @param lattice - from makeLattice
 */
export function valueNoise(lattice: Float32Array, x: number, y: number, z: number): number {
  const xf = Math.floor(x);
  const yf = Math.floor(y);
  const zf = Math.floor(z);
  let fx = x - xf;
  let fy = y - yf;
  let fz = z - zf;
  fx = fx * fx * (3 - 2 * fx);
  fy = fy * fy * (3 - 2 * fy);
  fz = fz * fz * (3 - 2 * fz);
  const m = LATTICE - 1;
  const x0 = xf & m;
  const y0 = yf & m;
  const z0 = zf & m;
  const x1 = (x0 + 1) & m;
  const y1 = (y0 + 1) & m;
  const z1 = (z0 + 1) & m;
  const r00 = (z0 * LATTICE + y0) * LATTICE;
  const r01 = (z0 * LATTICE + y1) * LATTICE;
  const r10 = (z1 * LATTICE + y0) * LATTICE;
  const r11 = (z1 * LATTICE + y1) * LATTICE;
  const a = lattice[r00 + x0] + fx * (lattice[r00 + x1] - lattice[r00 + x0]);
  const b = lattice[r01 + x0] + fx * (lattice[r01 + x1] - lattice[r01 + x0]);
  const c = lattice[r10 + x0] + fx * (lattice[r10 + x1] - lattice[r10 + x0]);
  const d = lattice[r11 + x0] + fx * (lattice[r11 + x1] - lattice[r11 + x0]);
  const e = a + fy * (b - a);
  const f = c + fy * (d - c);
  return e + fz * (f - e);
}
