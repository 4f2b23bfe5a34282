/**
 * Seeded pseudo-random numbers. Every random choice in coxa (voxel sampling, multi-start,
 * phantom noise, stress offsets) draws from an `Rng` so that `--seed` reproduces a run exactly.
 *
 * Generator: xoshiro128** (Blackman & Vigna 2018) seeded through splitmix32; uniform doubles
 * use 53 random bits. Normals by the polar Box-Muller method (Marsaglia & Bray 1964); Poisson
 * by Knuth's product method for small means and the PTRS transformed rejection of
 * Hörmann (1993) for large means.
 */

function splitmix32(state: { s: number }): number {
  state.s = (state.s + 0x9e3779b9) | 0;
  let z = state.s;
  z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
  z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
  return (z ^ (z >>> 16)) >>> 0;
}

/** A seeded generator; the same seed gives the same sequence on every platform. */
export class Rng {
  private a: number;
  private b: number;
  private c: number;
  private d: number;
  private spareNormal = Number.NaN;

  /** @param seed - any finite number; non-integers are folded into 32 bits */
  constructor(seed: number) {
    const state = { s: (Math.floor(seed) ^ Math.floor(seed / 4294967296)) | 0 };
    this.a = splitmix32(state);
    this.b = splitmix32(state);
    this.c = splitmix32(state);
    this.d = splitmix32(state);
    if ((this.a | this.b | this.c | this.d) === 0) this.a = 1;
  }

  /** Next raw 32-bit unsigned integer. */
  nextUint32(): number {
    const result = Math.imul(rotl(Math.imul(this.b, 5), 7), 9) >>> 0;
    const t = this.b << 9;
    this.c ^= this.a;
    this.d ^= this.b;
    this.b ^= this.c;
    this.a ^= this.d;
    this.c ^= t;
    this.d = rotl(this.d, 11);
    return result;
  }

  /** Uniform double in [0, 1) with 53 random bits. */
  uniform(): number {
    const hi = this.nextUint32() >>> 5; // 27 bits
    const lo = this.nextUint32() >>> 6; // 26 bits
    return (hi * 67108864 + lo) / 9007199254740992;
  }

  /** Uniform double in [lo, hi). */
  range(lo: number, hi: number): number {
    return lo + (hi - lo) * this.uniform();
  }

  /** Uniform integer in [0, n). */
  int(n: number): number {
    return Math.floor(this.uniform() * n);
  }

  /** Standard normal deviate. */
  normal(): number {
    if (!Number.isNaN(this.spareNormal)) {
      const v = this.spareNormal;
      this.spareNormal = Number.NaN;
      return v;
    }
    let u = 0;
    let v = 0;
    let s = 0;
    do {
      u = 2 * this.uniform() - 1;
      v = 2 * this.uniform() - 1;
      s = u * u + v * v;
    } while (s >= 1 || s === 0);
    const f = Math.sqrt((-2 * Math.log(s)) / s);
    this.spareNormal = v * f;
    return u * f;
  }

  /** Poisson deviate with mean `lambda` >= 0. */
  poisson(lambda: number): number {
    if (!(lambda > 0)) return 0;
    if (lambda < 30) {
      const limit = Math.exp(-lambda);
      let k = 0;
      let p = this.uniform();
      while (p > limit) {
        k++;
        p *= this.uniform();
      }
      return k;
    }
    // PTRS, Hörmann (1993), "The transformed rejection method for generating Poisson random variables".
    const slam = Math.sqrt(lambda);
    const loglam = Math.log(lambda);
    const b = 0.931 + 2.53 * slam;
    const a = -0.059 + 0.02483 * b;
    const invalpha = 1.1239 + 1.1328 / (b - 3.4);
    const vr = 0.9277 - 3.6224 / (b - 2);
    for (;;) {
      const u = this.uniform() - 0.5;
      const v = this.uniform();
      const us = 0.5 - Math.abs(u);
      const k = Math.floor(((2 * a) / us + b) * u + lambda + 0.43);
      if (us >= 0.07 && v <= vr) return k;
      if (k < 0 || (us < 0.013 && v > us)) continue;
      if (
        Math.log(v) + Math.log(invalpha) - Math.log(a / (us * us) + b) <=
        -lambda + k * loglam - logFactorial(k)
      ) {
        return k;
      }
    }
  }

  /** Fisher-Yates shuffle of `arr` in place; returns `arr`. */
  shuffle<T extends { length: number; [i: number]: unknown }>(arr: T): T {
    for (let i = arr.length - 1; i > 0; i--) {
      const j = this.int(i + 1);
      const tmp = arr[i];
      arr[i] = arr[j];
      arr[j] = tmp;
    }
    return arr;
  }
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}

function logFactorial(k: number): number {
  if (k < 2) return 0;
  // Stirling series; exact enough (error < 1e-10) for k >= 2 in the rejection test.
  const x = k + 1;
  return (x - 0.5) * Math.log(x) - x + 0.5 * Math.log(2 * Math.PI) + 1 / (12 * x) - 1 / (360 * x * x * x);
}
