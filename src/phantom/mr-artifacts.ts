/**
 * Metal artifacts for any MR volume, plus a smooth bias field and Rician noise.
 *
 * Conventions: the MR volume's voxel axes are the acquisition axes; `readoutAxis` (default 0, i) is
 * the frequency-encoding direction and `sliceAxis` (default 2, k) the slice direction. The metal is
 * described by a mask volume on its own grid and the matrix that carries its world into MR world
 * (x_mr = maskToMrWorld x_mask; identity when the mask is already in MR world). B0 points along
 * MR world z by default (the scanner bore).
 *
 * Physics (first-order models; constants are rough values from memory, no source):
 *  - susceptibility field offset: the metal is cut into cells, each treated as a uniformly
 *    magnetised sphere of the same volume V and susceptibility difference dChi. Outside a sphere
 *    the offset is exactly that of a point dipole: dB = B0 dChi V / (4 pi) (3 cos^2(theta) - 1) / r^3,
 *    i.e. (dChi / 3) B0 (a / r)^3 (3 cos^2(theta) - 1) for radius a (the classical magnetostatic
 *    result for a sphere in a uniform field). Frequency offset df = gamma-bar dB, gamma-bar = 42.577 MHz/T.
 *    Evaluated on a coarse grid along the MR voxel axes and interpolated trilinearly;
 *  - readout displacement: signal at x appears at x + df / G_r along the readout axis
 *    (G_r = readout bandwidth in Hz per mm). Each voxel's interval is mapped through the shift and its
 *    signal spread uniformly over the mapped interval, so signal bunches (pile-up, bright) where the
 *    shift compresses and thins out (dark) where it stretches;
 *  - through-slice displacement df / G_s moves spins out of the excited slice; the kept share is
 *    max(0, 1 - |dz| / slice thickness);
 *  - no signal from metal itself (metal share of each voxel sampled from the mask);
 *  - a thin halo of signal loss next to the metal surface, factor 1 - exp(-d / (halo severity)) at
 *    distance d mm (distance by an anisotropic chamfer transform, Borgefors 1986). It lumps the
 *    B1 distortion and intravoxel dephasing next to a conductor; the 4 mm width is a choice
 *    (no source), so that a titanium stem lying along B0, whose own field offset is tiny, still
 *    shows the dark rim it shows clinically.
 * `severity` scales dChi and the halo (0: metal void only, no field, no displacement).
 */
import { CoxaError } from "../common/errors.js";
import type { Rng } from "../common/random.js";
import { compose, identity, inverse, type Mat4, transformPoint } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";

/** Gyromagnetic ratio of 1H over 2 pi, Hz per tesla (CODATA 2018: 42.577478 MHz/T). */
export const GAMMA_BAR_HZ_PER_T = 42.577478e6;

/** Where the metal is, for MR artifacts. */
export interface MetalInMr {
  /** Mask on its own grid: nonzero = metal; the value selects `deltaChiPpm` when that is a table. */
  mask: Volume;
  /** Mask world -> MR world; default identity. */
  maskToMrWorld?: Mat4;
  /** Susceptibility difference to tissue in ppm: one number or per mask value; default 900. */
  deltaChiPpm?: number | Readonly<Record<number, number>>;
}

/** Options of addMrMetalArtifacts (sequence and field parameters). */
export interface MrArtifactOptions {
  /** 0..1, scales the susceptibility difference. */
  severity: number;
  /** Voxel axis of frequency encoding; default 0. */
  readoutAxis?: 0 | 1 | 2;
  /** Voxel axis of slice selection; default 2. */
  sliceAxis?: 0 | 1 | 2;
  /** Unit B0 direction in MR world; default [0, 0, 1]. */
  b0Direction?: readonly [number, number, number];
  /** Field strength, T; default 1.5. */
  fieldTesla?: number;
  /** Readout bandwidth per mm (Hz/mm = Hz per pixel / pixel size); default 250 (T1 spin echo, from memory). */
  readoutHzPerMm?: number;
  /** Slice-select bandwidth per mm of slice position (Hz/mm); default 250. */
  sliceHzPerMm?: number;
  /** Slice thickness, mm; default the spacing along sliceAxis. */
  sliceThicknessMm?: number;
  /** Size of the metal cells treated as spheres, mm; default 5. */
  dipoleCellMm?: number;
  /** Spacing of the coarse field grid, mm; default 4. */
  fieldGridMm?: number;
  /** e-folding width of the near-metal signal-loss halo at severity 1, mm; default 4. */
  haloMm?: number;
}

/** Result of addMrMetalArtifacts. */
export interface MrArtifactResult {
  /** Distorted MR, Float32Array, same grid. */
  volume: Volume<Float32Array>;
  /** Frequency offset per voxel, Hz. */
  fieldHz: Float32Array;
  /** Readout displacement per voxel, mm (signed, along the readout axis). */
  displacementMm: Float32Array;
  /** Largest |displacement| among voxels whose signal is kept (excited, not metal), mm. */
  maxDisplacementMm: number;
  /** Volume of signal-bearing voxels displaced by more than 1 mm, mm^3. */
  displacedVolumeMm3: number;
  /** Number of dipole cells the metal was cut into. */
  dipoles: number;
}

/**
 * Metal cells as point dipoles in MR world: x, y, z (mm), strength dChi V / 4pi (mm^3), radius a (mm),
 * sorted into groups of neighbouring cells. A group seen from farther than GROUP_FAR times its size
 * acts as one dipole of the summed strength at its strength-weighted centroid (a one-level
 * Barnes & Hut 1986 style approximation; the relative error is of order (size / distance)^2).
 */
export interface DipoleSet {
  x: Float64Array;
  y: Float64Array;
  z: Float64Array;
  strength: Float64Array;
  radius: Float64Array;
  /** Members of group g are dipoles groupStart[g] .. groupStart[g + 1] - 1. */
  groupStart: Int32Array;
  groupX: Float64Array;
  groupY: Float64Array;
  groupZ: Float64Array;
  groupStrength: Float64Array;
  /** Squared distance beyond which the group acts as one dipole, mm^2. */
  groupFar2: Float64Array;
  /** World bounds of the metal, MR world. */
  min: [number, number, number];
  max: [number, number, number];
}

/**
 * Cut a metal mask into cells and return one dipole per cell (strength dChi V / 4 pi).
 * @param metal - mask, its placement and susceptibilities
 * @param cellMm - cell size, mm
 * @param severity - multiplies dChi
 */
export function metalDipoles(metal: MetalInMr, cellMm: number, severity: number): DipoleSet {
  const mask = metal.mask;
  const toMr = compose(metal.maskToMrWorld ?? identity(), mask.indexToWorld);
  const det = Math.abs(
    toMr[0] * (toMr[5] * toMr[10] - toMr[6] * toMr[9]) -
      toMr[1] * (toMr[4] * toMr[10] - toMr[6] * toMr[8]) +
      toMr[2] * (toMr[4] * toMr[9] - toMr[5] * toMr[8]),
  );
  const voxelMm3 = det;
  const spec = metal.deltaChiPpm ?? 900;
  const [nx, ny, nz] = mask.dims;
  const sp = mask.spacingMm;
  const fx = Math.max(1, Math.round(cellMm / sp[0]));
  const fy = Math.max(1, Math.round(cellMm / sp[1]));
  const fz = Math.max(1, Math.round(cellMm / sp[2]));
  const cx = Math.ceil(nx / fx);
  const cy = Math.ceil(ny / fy);
  const cz = Math.ceil(nz / fz);
  const cells = cx * cy * cz;
  const count = new Float64Array(cells);
  const sx = new Float64Array(cells);
  const sy = new Float64Array(cells);
  const sz = new Float64Array(cells);
  const chi = new Float64Array(cells);
  const min: [number, number, number] = [Infinity, Infinity, Infinity];
  const max: [number, number, number] = [-Infinity, -Infinity, -Infinity];
  const p = [0, 0, 0];
  const data = mask.data;
  for (let k = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const code = data[row + i];
        if (code === 0) continue;
        let dchi: number;
        if (typeof spec === "number") dchi = spec;
        else {
          const v = spec[code];
          if (v === undefined) {
            throw new CoxaError("BAD_ARGUMENT", `no susceptibility given for metal mask value ${code}`);
          }
          dchi = v;
        }
        transformPoint(p, toMr, i, j, k);
        const c = Math.floor(i / fx) + cx * (Math.floor(j / fy) + cy * Math.floor(k / fz));
        count[c]++;
        sx[c] += p[0];
        sy[c] += p[1];
        sz[c] += p[2];
        chi[c] += dchi;
        for (let a = 0; a < 3; a++) {
          if (p[a] < min[a]) min[a] = p[a];
          if (p[a] > max[a]) max[a] = p[a];
        }
      }
    }
  }
  // Cells in group order: groups are blocks of GROUP_CELLS^3 cells.
  const gx = Math.ceil(cx / GROUP_CELLS);
  const gy = Math.ceil(cy / GROUP_CELLS);
  const groupOf = (c: number) => {
    const ci = c % cx;
    const cj = Math.floor(c / cx) % cy;
    const ck = Math.floor(c / (cx * cy));
    return (
      Math.floor(ci / GROUP_CELLS) + gx * (Math.floor(cj / GROUP_CELLS) + gy * Math.floor(ck / GROUP_CELLS))
    );
  };
  const idx: { c: number; g: number }[] = [];
  for (let c = 0; c < cells; c++) if (count[c] > 0) idx.push({ c, g: groupOf(c) });
  idx.sort((a, b) => a.g - b.g || a.c - b.c);
  const groups: number[] = [];
  for (let q = 0; q < idx.length; q++) if (q === 0 || idx[q].g !== idx[q - 1].g) groups.push(q);
  const nG = groups.length;
  const out: DipoleSet = {
    x: new Float64Array(idx.length),
    y: new Float64Array(idx.length),
    z: new Float64Array(idx.length),
    strength: new Float64Array(idx.length),
    radius: new Float64Array(idx.length),
    groupStart: Int32Array.from([...groups, idx.length]),
    groupX: new Float64Array(nG),
    groupY: new Float64Array(nG),
    groupZ: new Float64Array(nG),
    groupStrength: new Float64Array(nG),
    groupFar2: new Float64Array(nG),
    min,
    max,
  };
  for (let q = 0; q < idx.length; q++) {
    const c = idx[q].c;
    const n = count[c];
    const vol = n * voxelMm3;
    out.x[q] = sx[c] / n;
    out.y[q] = sy[c] / n;
    out.z[q] = sz[c] / n;
    out.strength[q] = (severity * (chi[c] / n) * 1e-6 * vol) / (4 * Math.PI);
    out.radius[q] = Math.cbrt((3 * vol) / (4 * Math.PI));
  }
  for (let g = 0; g < nG; g++) {
    let w = 0;
    let wx = 0;
    let wy = 0;
    let wz = 0;
    let sum = 0;
    for (let q = out.groupStart[g]; q < out.groupStart[g + 1]; q++) {
      const a = Math.abs(out.strength[q]) + 1e-300;
      w += a;
      wx += a * out.x[q];
      wy += a * out.y[q];
      wz += a * out.z[q];
      sum += out.strength[q];
    }
    out.groupX[g] = wx / w;
    out.groupY[g] = wy / w;
    out.groupZ[g] = wz / w;
    out.groupStrength[g] = sum;
    let size = 0;
    for (let q = out.groupStart[g]; q < out.groupStart[g + 1]; q++) {
      const d =
        Math.hypot(out.x[q] - out.groupX[g], out.y[q] - out.groupY[g], out.z[q] - out.groupZ[g]) +
        out.radius[q];
      if (d > size) size = d;
    }
    out.groupFar2[g] = (GROUP_FAR * size) ** 2;
  }
  return out;
}

/** Cells per group edge, and the distance (in group sizes) beyond which a group is one dipole. */
const GROUP_CELLS = 4;
const GROUP_FAR = 3;

/**
 * Field offset (tesla per tesla of B0, i.e. relative dB/B0) of a dipole set at one point.
 * Inside a cell's sphere the distance is held at its radius (no singularity).
 */
export function dipoleField(
  d: DipoleSet,
  bx: number,
  by: number,
  bz: number,
  x: number,
  y: number,
  z: number,
): number {
  let sum = 0;
  const nG = d.groupX.length;
  for (let g = 0; g < nG; g++) {
    const gx = x - d.groupX[g];
    const gy = y - d.groupY[g];
    const gz = z - d.groupZ[g];
    const g2 = gx * gx + gy * gy + gz * gz;
    if (g2 > d.groupFar2[g]) {
      const along = gx * bx + gy * by + gz * bz;
      sum += (d.groupStrength[g] * ((3 * along * along) / g2 - 1)) / (g2 * Math.sqrt(g2));
      continue;
    }
    sum += nearField(d, d.groupStart[g], d.groupStart[g + 1], bx, by, bz, x, y, z);
  }
  return sum;
}

/** Exact sum over dipoles q0..q1-1. */
function nearField(
  d: DipoleSet,
  q0: number,
  q1: number,
  bx: number,
  by: number,
  bz: number,
  x: number,
  y: number,
  z: number,
): number {
  let sum = 0;
  for (let q = q0; q < q1; q++) {
    const rx = x - d.x[q];
    const ry = y - d.y[q];
    const rz = z - d.z[q];
    let r2 = rx * rx + ry * ry + rz * rz;
    const a = d.radius[q];
    const a2 = a * a;
    const along = rx * bx + ry * by + rz * bz;
    let cos2 = r2 > 0 ? (along * along) / r2 : 1;
    if (r2 < a2) {
      r2 = a2;
      cos2 = 1 / 3; // inside: the sphere's interior offset of a uniform magnetisation is not modelled
    }
    sum += (d.strength[q] * (3 * cos2 - 1)) / (r2 * Math.sqrt(r2));
  }
  return sum;
}

/**
 * Add metal artifacts to an MR volume: void, readout displacement with pile-up, through-slice loss.
 * @param mr - MR magnitude volume (any datatype); not modified
 * @param metal - metal mask and its placement in MR world
 * @param options - severity and sequence parameters
 * @throws CoxaError BAD_ARGUMENT for a severity outside 0..1, equal readout and slice axes or
 *   non-positive bandwidths
 */
export function addMrMetalArtifacts(
  mr: Volume,
  metal: MetalInMr,
  options: MrArtifactOptions,
): MrArtifactResult {
  const severity = options.severity;
  if (!(severity >= 0 && severity <= 1))
    throw new CoxaError("BAD_ARGUMENT", `severity ${severity} is outside 0..1`);
  const ra = options.readoutAxis ?? 0;
  const sa = options.sliceAxis ?? 2;
  if (ra === sa) throw new CoxaError("BAD_ARGUMENT", "readout and slice axes must differ");
  const readoutHz = options.readoutHzPerMm ?? 250;
  const sliceHz = options.sliceHzPerMm ?? 250;
  if (!(readoutHz > 0) || !(sliceHz > 0)) throw new CoxaError("BAD_ARGUMENT", "bandwidths must be positive");
  const b0 = options.b0Direction ?? [0, 0, 1];
  const bl = Math.hypot(b0[0], b0[1], b0[2]);
  const [bx, by, bz] = [b0[0] / bl, b0[1] / bl, b0[2] / bl];
  const tesla = options.fieldTesla ?? 1.5;
  const hzPerUnit = GAMMA_BAR_HZ_PER_T * tesla;
  const n = mr.count;
  const spacing = mr.spacingMm;
  const thickness = options.sliceThicknessMm ?? spacing[sa];
  const m = mr.indexToWorld;

  // Metal share of each MR voxel (trilinear sample of the binary mask at the voxel centre).
  const mrToMaskIndex = compose(
    inverse(metal.mask.indexToWorld),
    inverse(metal.maskToMrWorld ?? identity()),
    m,
  );
  const metalShare = new Float32Array(n);
  sampleBinary(metalShare, metal.mask, mrToMaskIndex, mr.dims);

  // Field on a coarse grid over the region where it matters.
  const fieldHz = new Float32Array(n);
  const dip = metalDipoles(metal, options.dipoleCellMm ?? 5, severity);
  if (dip.x.length > 0 && severity > 0) {
    let total = 0;
    for (let q = 0; q < dip.strength.length; q++) total += Math.abs(dip.strength[q]);
    const fMin = 0.05 * Math.min(readoutHz * spacing[ra], sliceHz * thickness);
    const reach = Math.cbrt((2 * hzPerUnit * total) / fMin);
    const box = worldBoxToIndex(dip.min, dip.max, reach, inverse(m), mr.dims);
    if (box) fillField(fieldHz, dip, box, mr, options.fieldGridMm ?? 4, hzPerUnit, bx, by, bz);
  }

  // Near-metal halo: distance (mm) from each voxel centre to the nearest mostly-metal voxel.
  const halo = (options.haloMm ?? 4) * severity;
  let distance: Float32Array | null = null;
  if (halo > 0) {
    const seeds = new Uint8Array(n);
    let any = false;
    for (let i = 0; i < n; i++) {
      if (metalShare[i] >= 0.5) {
        seeds[i] = 1;
        any = true;
      }
    }
    if (any) distance = chamferDistance(seeds, mr.dims, spacing, 8 * halo);
  }
  const halfVoxel = (spacing[0] + spacing[1] + spacing[2]) / 6;

  // Signal kept before displacement, and the shift along the readout axis (voxels).
  const src = new Float32Array(n);
  const shift = new Float32Array(n);
  const displacementMm = new Float32Array(n);
  let maxDisp = 0;
  let displaced = 0;
  for (let i = 0; i < n; i++) {
    const df = fieldHz[i];
    const dz = df / sliceHz;
    let keep = Math.max(0, 1 - Math.abs(dz) / thickness) * (1 - metalShare[i]);
    if (distance) keep *= 1 - Math.exp(-Math.max(0, distance[i] - halfVoxel) / halo);
    src[i] = mr.data[i] * keep;
    const dMm = df / readoutHz;
    displacementMm[i] = dMm;
    shift[i] = dMm / spacing[ra];
    if (keep > 0 && mr.data[i] > 0) {
      if (Math.abs(dMm) > maxDisp) maxDisp = Math.abs(dMm);
      if (Math.abs(dMm) > 1) displaced++;
    }
  }
  const out = new Float32Array(n);
  remapAlongAxis(out, src, shift, mr.dims, ra);
  return {
    volume: mr.withData(out),
    fieldHz,
    displacementMm,
    maxDisplacementMm: maxDisp,
    displacedVolumeMm3: displaced * spacing[0] * spacing[1] * spacing[2],
    dipoles: dip.x.length,
  };
}

/**
 * Distance (mm) from every voxel centre to the nearest seed voxel centre by a two-pass chamfer
 * transform over the 26-neighbourhood with the true (anisotropic) neighbour distances
 * (Borgefors 1986, Comput Vision Graph 34:344); values are capped at `cap`.
 */
export function chamferDistance(
  seeds: Uint8Array,
  dims: readonly number[],
  spacingMm: readonly number[],
  cap: number,
): Float32Array {
  const [nx, ny, nz] = dims;
  const n = nx * ny * nz;
  const d = new Float32Array(n).fill(cap);
  // Only the box of the seeds grown by `cap` can hold distances below the cap.
  const lo = [Infinity, Infinity, Infinity];
  const hi = [-Infinity, -Infinity, -Infinity];
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        if (!seeds[row + i]) continue;
        d[row + i] = 0;
        if (i < lo[0]) lo[0] = i;
        if (i > hi[0]) hi[0] = i;
        if (j < lo[1]) lo[1] = j;
        if (j > hi[1]) hi[1] = j;
        if (k < lo[2]) lo[2] = k;
        if (k > hi[2]) hi[2] = k;
      }
    }
  if (lo[0] === Infinity) return d;
  const box = [0, 1, 2].map((a) => {
    const pad = Math.ceil(cap / spacingMm[a]);
    return [Math.max(0, lo[a] - pad), Math.min(dims[a] - 1, hi[a] + pad)];
  });
  // The 13 neighbours that precede a voxel in scan order (dk < 0, or dk = 0 and dj < 0, or dk = dj = 0 and di < 0).
  const offs: number[][] = [];
  for (let dk = -1; dk <= 0; dk++)
    for (let dj = -1; dj <= 1; dj++)
      for (let di = -1; di <= 1; di++) {
        if (dk === 0 && (dj > 0 || (dj === 0 && di >= 0))) continue;
        offs.push([di, dj, dk, Math.hypot(di * spacingMm[0], dj * spacingMm[1], dk * spacingMm[2])]);
      }
  const no = offs.length;
  const odi = Int32Array.from(offs.map((o) => o[0]));
  const odj = Int32Array.from(offs.map((o) => o[1]));
  const odk = Int32Array.from(offs.map((o) => o[2]));
  const ow = Float64Array.from(offs.map((o) => o[3]));
  const [bi, bj, bk] = box;
  for (let pass = 0; pass < 2; pass++) {
    const sign = pass === 0 ? 1 : -1;
    for (let kk = bk[0]; kk <= bk[1]; kk++) {
      const k = pass === 0 ? kk : bk[0] + bk[1] - kk;
      for (let jj = bj[0]; jj <= bj[1]; jj++) {
        const j = pass === 0 ? jj : bj[0] + bj[1] - jj;
        for (let ii = bi[0]; ii <= bi[1]; ii++) {
          const i = pass === 0 ? ii : bi[0] + bi[1] - ii;
          const idx = i + nx * (j + ny * k);
          let best = d[idx];
          if (best === 0) continue;
          for (let q = 0; q < no; q++) {
            const a = i + sign * odi[q];
            const b = j + sign * odj[q];
            const c = k + sign * odk[q];
            if (a < bi[0] || b < bj[0] || c < bk[0] || a > bi[1] || b > bj[1] || c > bk[1]) continue;
            const v = d[a + nx * (b + ny * c)] + ow[q];
            if (v < best) best = v;
          }
          d[idx] = best;
        }
      }
    }
  }
  return d;
}

/** Trilinear sample of (mask != 0) at every voxel centre of a grid, via index -> mask index. */
function sampleBinary(out: Float32Array, mask: Volume, toMaskIndex: Mat4, dims: readonly number[]): void {
  const [mx, my, mz] = mask.dims;
  const data = mask.data;
  const [nx, ny, nz] = dims;
  const t = toMaskIndex;
  for (let k = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const x = t[0] * i + t[1] * j + t[2] * k + t[3];
        const y = t[4] * i + t[5] * j + t[6] * k + t[7];
        const z = t[8] * i + t[9] * j + t[10] * k + t[11];
        if (x <= -1 || y <= -1 || z <= -1 || x >= mx || y >= my || z >= mz) continue;
        const x0 = Math.floor(x);
        const y0 = Math.floor(y);
        const z0 = Math.floor(z);
        const fx = x - x0;
        const fy = y - y0;
        const fz = z - z0;
        let s = 0;
        for (let c = 0; c < 8; c++) {
          const xi = x0 + (c & 1);
          const yi = y0 + ((c >> 1) & 1);
          const zi = z0 + ((c >> 2) & 1);
          if (xi < 0 || yi < 0 || zi < 0 || xi >= mx || yi >= my || zi >= mz) continue;
          if (data[xi + mx * (yi + my * zi)] === 0) continue;
          s += (c & 1 ? fx : 1 - fx) * ((c >> 1) & 1 ? fy : 1 - fy) * ((c >> 2) & 1 ? fz : 1 - fz);
        }
        out[row + i] = s;
      }
    }
  }
}

/** Inclusive index box of a world box grown by `pad` mm, clipped to the grid; null when empty. */
function worldBoxToIndex(
  min: readonly number[],
  max: readonly number[],
  pad: number,
  worldToIndex: Mat4,
  dims: readonly number[],
): number[] | null {
  const lo = [Infinity, Infinity, Infinity];
  const hi = [-Infinity, -Infinity, -Infinity];
  const q = [0, 0, 0];
  for (let c = 0; c < 8; c++) {
    transformPoint(
      q,
      worldToIndex,
      c & 1 ? max[0] + pad : min[0] - pad,
      c & 2 ? max[1] + pad : min[1] - pad,
      c & 4 ? max[2] + pad : min[2] - pad,
    );
    for (let a = 0; a < 3; a++) {
      lo[a] = Math.min(lo[a], q[a]);
      hi[a] = Math.max(hi[a], q[a]);
    }
  }
  const box = [0, 0, 0, 0, 0, 0];
  for (let a = 0; a < 3; a++) {
    box[2 * a] = Math.max(0, Math.floor(lo[a]));
    box[2 * a + 1] = Math.min(dims[a] - 1, Math.ceil(hi[a]));
    if (box[2 * a] > box[2 * a + 1]) return null;
  }
  return box;
}

/** Field (Hz) at every voxel of `box`: exact at coarse nodes, trilinear in between. */
function fillField(
  out: Float32Array,
  dip: DipoleSet,
  box: number[],
  mr: Volume,
  gridMm: number,
  hzPerUnit: number,
  bx: number,
  by: number,
  bz: number,
): void {
  const [nx, ny] = mr.dims;
  const sp = mr.spacingMm;
  const step = [0, 1, 2].map((a) => Math.max(1, Math.ceil(gridMm / sp[a] - 1e-6)));
  const cnt = [0, 1, 2].map((a) => Math.ceil((box[2 * a + 1] - box[2 * a]) / step[a]) + 1);
  const coarse = new Float64Array(cnt[0] * cnt[1] * cnt[2]);
  const m = mr.indexToWorld;
  const p = [0, 0, 0];
  for (let c = 0; c < cnt[2]; c++) {
    const k = Math.min(box[5], box[4] + c * step[2]);
    for (let b = 0; b < cnt[1]; b++) {
      const j = Math.min(box[3], box[2] + b * step[1]);
      for (let a = 0; a < cnt[0]; a++) {
        const i = Math.min(box[1], box[0] + a * step[0]);
        transformPoint(p, m, i, j, k);
        coarse[a + cnt[0] * (b + cnt[1] * c)] = hzPerUnit * dipoleField(dip, bx, by, bz, p[0], p[1], p[2]);
      }
    }
  }
  for (let k = box[4]; k <= box[5]; k++) {
    const ck = coarseCoord(k, box[4], step[2], cnt[2], box[5]);
    for (let j = box[2]; j <= box[3]; j++) {
      const cj = coarseCoord(j, box[2], step[1], cnt[1], box[3]);
      const row = nx * (j + ny * k);
      for (let i = box[0]; i <= box[1]; i++) {
        const ci = coarseCoord(i, box[0], step[0], cnt[0], box[1]);
        const i0 = Math.floor(ci);
        const j0 = Math.floor(cj);
        const k0 = Math.floor(ck);
        const i1 = Math.min(cnt[0] - 1, i0 + 1);
        const j1 = Math.min(cnt[1] - 1, j0 + 1);
        const k1 = Math.min(cnt[2] - 1, k0 + 1);
        const fi = ci - i0;
        const fj = cj - j0;
        const fk = ck - k0;
        const c0 = cnt[0];
        const c01 = cnt[0] * cnt[1];
        const p000 = i0 + c0 * j0 + c01 * k0;
        const p010 = i0 + c0 * j1 + c01 * k0;
        const p001 = i0 + c0 * j0 + c01 * k1;
        const p011 = i0 + c0 * j1 + c01 * k1;
        const di = i1 - i0;
        const v00 = coarse[p000] + fi * (coarse[p000 + di] - coarse[p000]);
        const v01 = coarse[p010] + fi * (coarse[p010 + di] - coarse[p010]);
        const v10 = coarse[p001] + fi * (coarse[p001 + di] - coarse[p001]);
        const v11 = coarse[p011] + fi * (coarse[p011 + di] - coarse[p011]);
        const v0 = v00 + fj * (v01 - v00);
        const v1 = v10 + fj * (v11 - v10);
        out[row + i] = v0 + fk * (v1 - v0);
      }
    }
  }
}

/** Continuous coarse-grid coordinate of fine index `i` (the last node sits at `last`). */
function coarseCoord(i: number, first: number, step: number, count: number, last: number): number {
  const c = (i - first) / step;
  if (c <= count - 2) return c;
  // Between the second-last node and the (clamped) last node.
  const prev = first + (count - 2) * step;
  const span = last - prev;
  return count - 2 + (span > 0 ? (i - prev) / span : 0);
}

/**
 * Move signal along one voxel axis: each voxel's interval [u - 1/2, u + 1/2] goes to
 * [u - 1/2 + s(u - 1/2), u + 1/2 + s(u + 1/2)] (edge shifts averaged from the neighbours) and its
 * signal is spread uniformly over it. Signal is conserved except what leaves the grid.
 */
export function remapAlongAxis(
  out: Float32Array,
  src: Float32Array,
  shift: Float32Array,
  dims: readonly number[],
  axis: 0 | 1 | 2,
): Float32Array {
  const [nx, ny, nz] = dims;
  const len = dims[axis];
  const stride = axis === 0 ? 1 : axis === 1 ? nx : nx * ny;
  const lines = (nx * ny * nz) / len;
  out.fill(0);
  for (let line = 0; line < lines; line++) {
    // First voxel of this line.
    let start: number;
    if (axis === 0) start = line * nx;
    else if (axis === 1) start = (line % nx) + nx * ny * Math.floor(line / nx);
    else start = line;
    for (let u = 0; u < len; u++) {
      const idx = start + u * stride;
      const s = src[idx];
      if (s === 0) continue;
      const here = shift[idx];
      const before = u > 0 ? 0.5 * (here + shift[idx - stride]) : here;
      const after = u < len - 1 ? 0.5 * (here + shift[idx + stride]) : here;
      let a = u - 0.5 + before;
      let b = u + 0.5 + after;
      if (a > b) {
        const t = a;
        a = b;
        b = t;
      }
      const width = b - a;
      if (width < 1e-6) {
        const bin = Math.round(a);
        if (bin >= 0 && bin < len) out[start + bin * stride] += s;
        continue;
      }
      const density = s / width;
      const first = Math.max(0, Math.round(a));
      const last = Math.min(len - 1, Math.round(b));
      for (let bin = first; bin <= last; bin++) {
        const lo = Math.max(a, bin - 0.5);
        const hi = Math.min(b, bin + 0.5);
        if (hi > lo) out[start + bin * stride] += density * (hi - lo);
      }
    }
  }
  return out;
}

/** Options of applyBiasField. */
export interface BiasFieldOptions {
  /** Peak |log gain|; default 0.15 (about +-16 %). */
  amplitude?: number;
}

/**
 * Multiply by a smooth random bias field exp(amplitude * f), f a random quadratic polynomial of the
 * normalised voxel coordinates scaled to peak |f| = 1 over the grid (common practice, no source).
 * @returns a new Float32Array volume and the field's gain range
 */
export function applyBiasField(
  mr: Volume,
  rng: Rng,
  options: BiasFieldOptions = {},
): { volume: Volume<Float32Array>; minGain: number; maxGain: number } {
  const amplitude = options.amplitude ?? 0.15;
  const coef = new Float64Array(10);
  for (let c = 0; c < 10; c++) coef[c] = rng.range(-1, 1);
  coef[0] = 0;
  const [nx, ny, nz] = mr.dims;
  const f = new Float32Array(mr.count);
  let peak = 0;
  for (let k = 0; k < nz; k++) {
    const w = nz > 1 ? (2 * k) / (nz - 1) - 1 : 0;
    for (let j = 0; j < ny; j++) {
      const v = ny > 1 ? (2 * j) / (ny - 1) - 1 : 0;
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const u = nx > 1 ? (2 * i) / (nx - 1) - 1 : 0;
        const val =
          coef[1] * u +
          coef[2] * v +
          coef[3] * w +
          coef[4] * u * u +
          coef[5] * v * v +
          coef[6] * w * w +
          coef[7] * u * v +
          coef[8] * u * w +
          coef[9] * v * w;
        f[row + i] = val;
        if (Math.abs(val) > peak) peak = Math.abs(val);
      }
    }
  }
  const scale = peak > 0 ? amplitude / peak : 0;
  const out = new Float32Array(mr.count);
  let minGain = Infinity;
  let maxGain = -Infinity;
  for (let i = 0; i < mr.count; i++) {
    const g = Math.exp(scale * f[i]);
    if (g < minGain) minGain = g;
    if (g > maxGain) maxGain = g;
    out[i] = mr.data[i] * g;
  }
  return { volume: mr.withData(out), minGain, maxGain };
}

/**
 * Rician magnitude noise: |v + sigma (n1 + i n2)| with independent standard normals (Gudbjartsson
 * & Patz 1995, Magn Reson Med 34:910).
 * @param sigma - noise standard deviation of each channel, in image units (>= 0)
 */
export function addRicianNoise(mr: Volume, sigma: number, rng: Rng): Volume<Float32Array> {
  if (!(sigma >= 0)) throw new CoxaError("BAD_ARGUMENT", `noise sigma ${sigma} is negative`);
  const out = new Float32Array(mr.count);
  for (let i = 0; i < mr.count; i++) {
    const re = mr.data[i] + sigma * rng.normal();
    const im = sigma * rng.normal();
    out[i] = Math.sqrt(re * re + im * im);
  }
  return mr.withData(out);
}
