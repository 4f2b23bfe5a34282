/**
 * Metal artifacts for any CT volume in Hounsfield units, made in the projection domain one axial
 * slice at a time (slices are planes of constant voxel index k; in-plane axes i, j with their own
 * spacings, assumed orthogonal).
 *
 * For each slice that holds metal:
 *  1. the slice is resampled onto a square projection grid (pixel h mm, at most
 *     `maxProjectionSize` pixels a side) as linear attenuation: tissue mu = mu_water (1 + HU/1000),
 *     metal mu from its material (the stored metal HU are clipped and say nothing about it);
 *  2. the rays that meet metal are forward-projected (parallel-beam Radon transform, radon.ts):
 *     the total line integral p ray by ray, the metal line integral p_m by splatting the metal
 *     pixels onto the detector;
 *  3. beam hardening: p_bh = p - beta p_m^2 (first-order polychromatic error growing with the square
 *     of the metal path; cf. the water/bone correction literature, e.g. Joseph & Spital 1978);
 *  4. photon starvation: detected counts N ~ Poisson(I0 exp(-p_bh)), floored at one count, measured
 *     p' = -ln(N / I0), so noise explodes along rays through metal;
 *  5. the error severity (p' - p), blurred along the detector by [1, 2, 1] / 4, is reconstructed by
 *     filtered back-projection (ramp filter) and added to the slice in HU, so bright and dark
 *     streaks radiate from the metal.
 * Rays that miss metal carry no error (their ordinary quantum noise is left to the caller's image
 * noise). Metal voxels keep their input value. Output is clipped to the 12-bit range.
 *
 * Every slice draws from its own generator seeded from the caller's Rng and the slice index, so
 * results do not depend on the number of worker threads.
 * Physical constants are rough values from memory (see tissues.ts); I0 = 2e5 photons per ray and
 * beta = 0.02 are choices made for a plausible look (no source).
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { Rng } from "../common/random.js";
import { defaultThreads, WorkerPool, workerScript } from "../common/workers.js";
import type { Volume } from "../image/volume.js";
import { backProject, fullDetectors, parallelBeamGeometry, rampFilter, rayIntegral } from "./radon.js";
import { CT_MAX_HU, CT_MIN_HU, huToMu, MU_WATER_PER_MM } from "./tissues.js";

/** Options of addCtMetalArtifacts. */
export interface CtArtifactOptions {
  /** 0 (metal present, no artifacts) .. 1 (full strength); scales the projection error linearly. */
  severity: number;
  /** Metal mask on the CT grid (nonzero = metal; the value selects `metalMuPerMm`). Default: HU >= metalHu. */
  metalMask?: Uint8Array;
  /** Threshold for metal when no mask is given, HU; default 2500 (design.md). */
  metalHu?: number;
  /** Metal attenuation in 1/mm: one number for all metal, or per mask value; default 0.5. */
  metalMuPerMm?: number | Readonly<Record<number, number>>;
  /** Unattenuated photons per ray, I0; default 2e5. */
  photonsPerRay?: number;
  /** Beam-hardening coefficient beta (per squared metal line integral); default 0.02. */
  beamHardening?: number;
  /** Largest projection grid side in pixels; default 256 (bigger slices are binned). */
  maxProjectionSize?: number;
  /** Projection angles over 180 degrees; default min(360, n) for an n-pixel projection grid. */
  angles?: number;
  /** Worker threads; default the machine's parallelism; 1 runs in this thread. */
  threads?: number;
  onProgress?: ProgressFn;
}

/** Result of addCtMetalArtifacts. */
export interface CtArtifactResult {
  /** The CT with artifacts, HU, Float32Array, same grid. */
  volume: Volume<Float32Array>;
  /** Slice indices k that held metal. */
  slicesWithMetal: number[];
  /** Largest |artifact| added to a non-metal voxel, HU. */
  maxAbsArtifactHu: number;
}

/** Inputs of one slice (plain data: posted to worker threads). */
export interface SliceArtifactInput {
  nx: number;
  ny: number;
  /** In-plane spacing along i and j, mm. */
  dx: number;
  dy: number;
  /** Slice HU, i fastest. */
  hu: Float32Array;
  /** Metal attenuation per pixel, 1/mm (0 = no metal). */
  metalMu: Float32Array;
  severity: number;
  photonsPerRay: number;
  beamHardening: number;
  maxProjectionSize: number;
  angles?: number;
  /** Seed of this slice's generator. */
  seed: number;
}

/**
 * Artifact of one axial slice in HU (to be added to the slice), following the steps in the module
 * header. Pure function of its input.
 * @returns Float32Array of nx*ny HU differences (zero where metal is)
 */
export function sliceMetalArtifact(input: SliceArtifactInput): Float32Array {
  const { nx, ny, dx, dy, hu, metalMu } = input;
  const out = new Float32Array(nx * ny);
  if (input.severity <= 0) return out;
  const lx = nx * dx;
  const ly = ny * dy;
  const h = Math.max(dx, dy, Math.max(lx, ly) / input.maxProjectionSize);
  const n = Math.max(2, Math.ceil(Math.max(lx, ly) / h - 1e-9));
  const ox = (lx - n * h) / 2;
  const oy = (ly - n * h) / 2;
  const fs = Math.max(1, Math.round(h / Math.min(dx, dy)));
  // 1. attenuation on the projection grid, as mu * h per pixel (so a ray sum is a line integral).
  const total = new Float64Array(n * n);
  const metal = new Float64Array(n * n);
  const metalPixels: number[] = [];
  for (let row = 0; row < n; row++) {
    for (let col = 0; col < n; col++) {
      let huSum = 0;
      let muSum = 0;
      for (let sy = 0; sy < fs; sy++) {
        const y = oy + (row + (sy + 0.5) / fs) * h;
        const j = y / dy - 0.5;
        for (let sx = 0; sx < fs; sx++) {
          const x = ox + (col + (sx + 0.5) / fs) * h;
          const i = x / dx - 0.5;
          huSum += bilinear(hu, nx, ny, i, j, -1000);
          muSum += bilinear(metalMu, nx, ny, i, j, 0);
        }
      }
      const huMean = huSum / (fs * fs);
      const muMetal = muSum / (fs * fs);
      const muTissue = huToMu(Math.min(huMean, CT_MAX_HU));
      const p = row * n + col;
      total[p] = Math.max(muTissue, muMetal) * h;
      if (muMetal > 0) {
        metal[p] = muMetal * h;
        metalPixels.push(p);
      }
    }
  }
  if (metalPixels.length === 0) return out;
  // 2. metal line integrals by splatting the (few) metal pixels onto the detector (pixel-driven,
  // linear weights); rays that meet metal are those bins and their neighbours.
  const geom = parallelBeamGeometry(n, {
    detectors: fullDetectors(n),
    angles: input.angles ?? Math.min(360, n),
  });
  const nA = geom.anglesDeg.length;
  const nDet = geom.detectors;
  const half = Math.floor(nDet / 2);
  const c = Math.floor(n / 2);
  const pMetal = new Float64Array(nA * nDet);
  const rays = new Uint8Array(nA * nDet);
  for (let a = 0; a < nA; a++) {
    const cs = geom.cos[a];
    const sn = geom.sin[a];
    const base = a * nDet;
    for (let q = 0; q < metalPixels.length; q++) {
      const p = metalPixels[q];
      const col = p % n;
      const row = (p - col) / n;
      const u = (col - c) * cs - (row - c) * sn + half;
      const b0 = Math.floor(u);
      const f = u - b0;
      if (b0 >= 0 && b0 < nDet) pMetal[base + b0] += (1 - f) * metal[p];
      if (b0 + 1 >= 0 && b0 + 1 < nDet) pMetal[base + b0 + 1] += f * metal[p];
      const lo = Math.max(0, b0 - 1);
      const hi = Math.min(nDet - 1, b0 + 2);
      for (let b = lo; b <= hi; b++) rays[base + b] = 1;
    }
  }
  // 3-4. physics on those rays; the error sinogram is zero elsewhere.
  const rng = new Rng(input.seed);
  const err = new Float64Array(nA * nDet);
  const i0 = input.photonsPerRay;
  const logI0 = Math.log(i0);
  for (let a = 0; a < nA; a++) {
    const base = a * nDet;
    for (let b = 0; b < nDet; b++) {
      if (rays[base + b] === 0) continue;
      const pTotal = rayIntegral(total, geom, a, b);
      const pm = pMetal[base + b];
      const pHard = pTotal - input.beamHardening * pm * pm;
      const counts = Math.max(1, rng.poisson(i0 * Math.exp(-pHard)));
      const measured = logI0 - Math.log(counts);
      err[base + b] = input.severity * (measured - pTotal);
    }
  }
  // Detector blur: [1, 2, 1] / 4 along each projection (the error has the width of a few bins,
  // as a detector aperture and a standard reconstruction kernel give it; choice, no source).
  const blurred = new Float64Array(nA * nDet);
  for (let a = 0; a < nA; a++) {
    const base = a * nDet;
    for (let b = 0; b < nDet; b++) {
      const mid = err[base + b];
      const left = b > 0 ? err[base + b - 1] : 0;
      const right = b < nDet - 1 ? err[base + b + 1] : 0;
      blurred[base + b] = 0.25 * left + 0.5 * mid + 0.25 * right;
    }
  }
  // 5. FBP of the error: mu*h per pixel -> HU.
  const recon = backProject(null, rampFilter(null, blurred, geom), geom);
  const toHu = 1000 / (MU_WATER_PER_MM * h);
  for (let j = 0; j < ny; j++) {
    const row = ((j + 0.5) * dy - oy) / h - 0.5;
    for (let i = 0; i < nx; i++) {
      const idx = i + nx * j;
      if (metalMu[idx] > 0) continue;
      const col = ((i + 0.5) * dx - ox) / h - 0.5;
      out[idx] = bilinear(recon, n, n, col, row, 0) * toHu;
    }
  }
  return out;
}

/** Bilinear sample of a row-major nx x ny image at continuous (i, j); `outside` beyond the edges. */
function bilinear(
  img: ArrayLike<number>,
  nx: number,
  ny: number,
  i: number,
  j: number,
  outside: number,
): number {
  if (i < -0.5 || j < -0.5 || i > nx - 0.5 || j > ny - 0.5) return outside;
  const ic = i < 0 ? 0 : i > nx - 1 ? nx - 1 : i;
  const jc = j < 0 ? 0 : j > ny - 1 ? ny - 1 : j;
  const i0 = Math.min(nx - 2, Math.floor(ic));
  const j0 = Math.min(ny - 2, Math.floor(jc));
  if (nx === 1 || ny === 1) return img[Math.round(jc) * nx + Math.round(ic)];
  const fi = ic - i0;
  const fj = jc - j0;
  const r0 = j0 * nx + i0;
  const r1 = r0 + nx;
  return (1 - fj) * ((1 - fi) * img[r0] + fi * img[r0 + 1]) + fj * ((1 - fi) * img[r1] + fi * img[r1 + 1]);
}

/** Per-slice seed derived from a base draw and the slice index. */
function sliceSeed(base: number, k: number): number {
  return (base ^ Math.imul(k + 1, 0x9e3779b1)) >>> 0;
}

/**
 * Add projection-domain metal artifacts to a CT volume in HU.
 * @param ct - CT in HU (any datatype); not modified
 * @param rng - seeded generator (one draw is taken; slices use derived seeds)
 * @param options - severity, metal definition, physics and threading
 * @throws CoxaError BAD_ARGUMENT for a severity outside 0..1 or a mask of the wrong size
 */
export async function addCtMetalArtifacts(
  ct: Volume,
  rng: Rng,
  options: CtArtifactOptions,
): Promise<CtArtifactResult> {
  const severity = options.severity;
  if (!(severity >= 0 && severity <= 1)) {
    throw new CoxaError("BAD_ARGUMENT", `severity ${severity} is outside 0..1`);
  }
  const [nx, ny, nz] = ct.dims;
  const plane = nx * ny;
  const mask = options.metalMask;
  if (mask && mask.length !== ct.count) {
    throw new CoxaError("BAD_ARGUMENT", `metal mask has ${mask.length} voxels, the CT ${ct.count}`);
  }
  const threshold = options.metalHu ?? 2500;
  const muSpec = options.metalMuPerMm ?? 0.5;
  const muOf = (code: number): number => {
    if (typeof muSpec === "number") return muSpec;
    const mu = muSpec[code];
    if (mu === undefined)
      throw new CoxaError("BAD_ARGUMENT", `no metal attenuation given for mask value ${code}`);
    return mu;
  };
  let codes = mask;
  if (!codes) {
    codes = new Uint8Array(ct.count);
    for (let i = 0; i < ct.count; i++) if (ct.data[i] >= threshold) codes[i] = 1;
  }
  const base = rng.nextUint32();
  const out = new Float32Array(ct.count);
  for (let i = 0; i < ct.count; i++) out[i] = ct.data[i];
  const spacing = ct.spacingMm;
  const tasks: { k: number; input: SliceArtifactInput }[] = [];
  for (let k = 0; k < nz; k++) {
    let any = false;
    const off = k * plane;
    for (let p = 0; p < plane && !any; p++) if (codes[off + p] !== 0) any = true;
    if (!any) continue;
    const hu = new Float32Array(plane);
    const metalMu = new Float32Array(plane);
    for (let p = 0; p < plane; p++) {
      hu[p] = ct.data[off + p];
      const code = codes[off + p];
      if (code) metalMu[p] = muOf(code);
    }
    tasks.push({
      k,
      input: {
        nx,
        ny,
        dx: spacing[0],
        dy: spacing[1],
        hu,
        metalMu,
        severity,
        photonsPerRay: options.photonsPerRay ?? 2e5,
        beamHardening: options.beamHardening ?? 0.02,
        maxProjectionSize: options.maxProjectionSize ?? 256,
        angles: options.angles,
        seed: sliceSeed(base, k),
      },
    });
  }
  let maxAbs = 0;
  let done = 0;
  const apply = (k: number, delta: Float32Array, metalMu: Float32Array) => {
    const off = k * plane;
    for (let p = 0; p < plane; p++) {
      if (metalMu[p] > 0) continue;
      const d = delta[p];
      if (Math.abs(d) > maxAbs) maxAbs = Math.abs(d);
      const val = out[off + p] + d;
      out[off + p] = val < CT_MIN_HU ? CT_MIN_HU : val > CT_MAX_HU ? CT_MAX_HU : val;
    }
    done++;
    options.onProgress?.({ stage: "CT metal artifacts", fraction: done / tasks.length });
  };
  const threads = Math.min(options.threads ?? defaultThreads(), tasks.length);
  if (severity > 0 && tasks.length > 0) {
    if (threads <= 1) {
      for (const t of tasks) apply(t.k, sliceMetalArtifact(t.input), t.input.metalMu);
    } else {
      const pool = new WorkerPool(workerScript(import.meta.url, "phantom-worker"), threads);
      try {
        await Promise.all(
          tasks.map((t) =>
            pool
              .run<Float32Array>({ kind: "ct-slice", input: t.input })
              .then((delta) => apply(t.k, delta, t.input.metalMu)),
          ),
        );
      } finally {
        await pool.close();
      }
    }
  }
  return { volume: ct.withData(out), slicesWithMetal: tasks.map((t) => t.k), maxAbsArtifactHu: maxAbs };
}
