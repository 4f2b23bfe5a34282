/**
 * Signed-distance shapes for the analytic phantom, described as plain data (JSON-serialisable, so
 * they travel to worker threads) and compiled into a flat postfix program that is evaluated per
 * voxel without allocation, recursion or closures.
 *
 * Conventions: coordinates are millimetres in the shape's own frame (for the phantom anatomy, the
 * patient frame: +x right, +y anterior, +z superior). The value is negative inside, positive outside,
 * and approximates the Euclidean distance to the surface near it (the approximations used are first
 * order, |f| / |grad f|, so they are distance estimates, not exact distances, away from the surface).
 *
 * Methods: ellipsoid distance estimated as k0 (k0 - 1) / k1 with k0 = |q / r|, k1 = |q / r^2|
 * (first-order distance f / |grad f| of f = k0 - 1, scaled); tapered capsule as the distance to a
 * segment minus a linearly varying radius; rounded box by the exterior/interior split; smooth union
 * by the polynomial smooth minimum b + (a - b) h - k h (1 - h) with h = clamp(1/2 + (b - a) / 2k, 0, 1)
 * (a common construction for blended constructive solid geometry; common practice, no source).
 */
import { CoxaError } from "../common/errors.js";

/** A point or direction, mm (x, y, z). */
export type V3 = readonly [number, number, number];

/** Shape description; every length in mm. */
export type Shape =
  | { op: "sphere"; c: V3; r: number }
  /** axes: rows are the local x, y, z axes as world unit vectors (default identity). */
  | { op: "ellipsoid"; c: V3; r: V3; axes?: readonly [V3, V3, V3] }
  /** Segment a -> b with radius ra at a and rb at b. */
  | { op: "capsule"; a: V3; b: V3; ra: number; rb: number }
  | { op: "box"; c: V3; half: V3; axes?: readonly [V3, V3, V3]; round?: number }
  /** Half-space dot(x - p, n) <= 0 (n is normalised on compile). */
  | { op: "plane"; p: V3; n: V3 }
  | { op: "union"; of: readonly Shape[]; k?: number }
  | { op: "intersect"; of: readonly Shape[]; k?: number }
  | { op: "subtract"; from: Shape; cut: Shape; k?: number }
  /** Grow (by > 0) or shrink (by < 0) a shape by `by` mm. */
  | { op: "offset"; of: Shape; by: number };

/** Axis-aligned bounds in the shape frame (mm). */
export interface Bounds {
  min: [number, number, number];
  max: [number, number, number];
}

const OP_SPHERE = 1;
const OP_ELLIPSOID = 2;
const OP_CAPSULE = 3;
const OP_BOX = 4;
const OP_PLANE = 5;
const OP_UNION = 6;
const OP_INTERSECT = 7;
const OP_SUBTRACT = 8;
const OP_OFFSET = 9;

/** A compiled shape: op codes with parameter offsets, evaluated by `evalProgram`. */
export interface Program {
  /** Pairs (op code, parameter offset) in postfix order. */
  code: Int32Array;
  params: Float64Array;
  /** Deepest evaluation stack needed. */
  depth: number;
  bounds: Bounds;
}

const IDENTITY_AXES: readonly [V3, V3, V3] = [
  [1, 0, 0],
  [0, 1, 0],
  [0, 0, 1],
];

/**
 * Compile a shape into a flat program.
 * @throws CoxaError BAD_ARGUMENT for non-positive radii, empty unions or a bare plane at top level
 */
export function compileShape(shape: Shape): Program {
  const code: number[] = [];
  const params: number[] = [];
  let depth = 0;
  let maxDepth = 0;
  const push = (op: number, values: number[]) => {
    code.push(op, params.length);
    for (const v of values) {
      if (!Number.isFinite(v)) throw new CoxaError("BAD_ARGUMENT", `shape parameter ${v} is not finite`);
      params.push(v);
    }
  };
  const emit = (s: Shape): void => {
    switch (s.op) {
      case "sphere":
        positive(s.r, "sphere radius");
        push(OP_SPHERE, [...s.c, s.r]);
        depth++;
        break;
      case "ellipsoid": {
        for (const r of s.r) positive(r, "ellipsoid radius");
        const ax = orthonormalAxes(s.axes ?? IDENTITY_AXES);
        push(OP_ELLIPSOID, [...s.c, ...s.r, ...ax[0], ...ax[1], ...ax[2]]);
        depth++;
        break;
      }
      case "capsule":
        positive(s.ra, "capsule radius");
        positive(s.rb, "capsule radius");
        push(OP_CAPSULE, [...s.a, ...s.b, s.ra, s.rb]);
        depth++;
        break;
      case "box": {
        for (const h of s.half) positive(h, "box half-size");
        const ax = orthonormalAxes(s.axes ?? IDENTITY_AXES);
        push(OP_BOX, [...s.c, ...s.half, ...ax[0], ...ax[1], ...ax[2], s.round ?? 0]);
        depth++;
        break;
      }
      case "plane": {
        const len = Math.hypot(s.n[0], s.n[1], s.n[2]);
        positive(len, "plane normal length");
        push(OP_PLANE, [...s.p, s.n[0] / len, s.n[1] / len, s.n[2] / len]);
        depth++;
        break;
      }
      case "union":
      case "intersect": {
        if (s.of.length === 0) throw new CoxaError("BAD_ARGUMENT", `${s.op} of no shapes`);
        emit(s.of[0]);
        for (let i = 1; i < s.of.length; i++) {
          emit(s.of[i]);
          push(s.op === "union" ? OP_UNION : OP_INTERSECT, [s.k ?? 0]);
          depth--;
        }
        break;
      }
      case "subtract":
        emit(s.from);
        emit(s.cut);
        push(OP_SUBTRACT, [s.k ?? 0]);
        depth--;
        break;
      case "offset":
        emit(s.of);
        push(OP_OFFSET, [s.by]);
        break;
    }
    if (depth > maxDepth) maxDepth = depth;
  };
  emit(shape);
  const bounds = shapeBounds(shape);
  if (
    !Number.isFinite(
      bounds.min[0] + bounds.min[1] + bounds.min[2] + bounds.max[0] + bounds.max[1] + bounds.max[2],
    )
  ) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      "shape is unbounded (a plane must be intersected with a bounded shape)",
    );
  }
  return { code: Int32Array.from(code), params: Float64Array.from(params), depth: maxDepth, bounds };
}

function positive(v: number, what: string): void {
  if (!(v > 0) || !Number.isFinite(v)) throw new CoxaError("BAD_ARGUMENT", `${what} ${v} is not positive`);
}

function orthonormalAxes(axes: readonly [V3, V3, V3]): [number[], number[], number[]] {
  const out: [number[], number[], number[]] = [[], [], []];
  for (let a = 0; a < 3; a++) {
    const v = axes[a];
    const len = Math.hypot(v[0], v[1], v[2]);
    positive(len, "axis length");
    out[a] = [v[0] / len, v[1] / len, v[2] / len];
  }
  return out;
}

/** Conservative bounds of a shape (infinite for a bare plane). */
export function shapeBounds(s: Shape): Bounds {
  switch (s.op) {
    case "sphere":
      return box3(s.c, [s.r, s.r, s.r]);
    case "ellipsoid": {
      const ax = s.axes ?? IDENTITY_AXES;
      const ext: [number, number, number] = [0, 0, 0];
      for (let i = 0; i < 3; i++) {
        let sum = 0;
        for (let j = 0; j < 3; j++) {
          const len = Math.hypot(ax[j][0], ax[j][1], ax[j][2]);
          sum += ((ax[j][i] / len) * s.r[j]) ** 2;
        }
        ext[i] = Math.sqrt(sum);
      }
      return box3(s.c, ext);
    }
    case "capsule": {
      const r = Math.max(s.ra, s.rb);
      return {
        min: [Math.min(s.a[0], s.b[0]) - r, Math.min(s.a[1], s.b[1]) - r, Math.min(s.a[2], s.b[2]) - r],
        max: [Math.max(s.a[0], s.b[0]) + r, Math.max(s.a[1], s.b[1]) + r, Math.max(s.a[2], s.b[2]) + r],
      };
    }
    case "box": {
      const ax = s.axes ?? IDENTITY_AXES;
      const ext: [number, number, number] = [0, 0, 0];
      for (let i = 0; i < 3; i++) {
        for (let j = 0; j < 3; j++) {
          const len = Math.hypot(ax[j][0], ax[j][1], ax[j][2]);
          ext[i] += Math.abs(ax[j][i] / len) * s.half[j];
        }
      }
      return box3(s.c, ext);
    }
    case "plane":
      return { min: [-Infinity, -Infinity, -Infinity], max: [Infinity, Infinity, Infinity] };
    case "union": {
      const out = emptyBounds();
      for (const c of s.of) growBounds(out, shapeBounds(c));
      return padBounds(out, (s.k ?? 0) / 4);
    }
    case "intersect": {
      const out: Bounds = { min: [-Infinity, -Infinity, -Infinity], max: [Infinity, Infinity, Infinity] };
      for (const c of s.of) {
        const b = shapeBounds(c);
        for (let a = 0; a < 3; a++) {
          out.min[a] = Math.max(out.min[a], b.min[a]);
          out.max[a] = Math.min(out.max[a], b.max[a]);
        }
      }
      return out;
    }
    case "subtract":
      return shapeBounds(s.from);
    case "offset":
      return padBounds(shapeBounds(s.of), Math.max(0, s.by));
  }
}

function box3(c: V3, ext: readonly number[]): Bounds {
  return {
    min: [c[0] - ext[0], c[1] - ext[1], c[2] - ext[2]],
    max: [c[0] + ext[0], c[1] + ext[1], c[2] + ext[2]],
  };
}

function emptyBounds(): Bounds {
  return { min: [Infinity, Infinity, Infinity], max: [-Infinity, -Infinity, -Infinity] };
}

function growBounds(out: Bounds, b: Bounds): void {
  for (let a = 0; a < 3; a++) {
    out.min[a] = Math.min(out.min[a], b.min[a]);
    out.max[a] = Math.max(out.max[a], b.max[a]);
  }
}

function padBounds(b: Bounds, pad: number): Bounds {
  return {
    min: [b.min[0] - pad, b.min[1] - pad, b.min[2] - pad],
    max: [b.max[0] + pad, b.max[1] + pad, b.max[2] + pad],
  };
}

/** Scratch stack for evalProgram, sized for `prog`. */
export function programStack(prog: Program): Float64Array {
  return new Float64Array(Math.max(1, prog.depth));
}

/**
 * Signed distance estimate of the compiled shape at (x, y, z) mm.
 * @param prog - compiled shape
 * @param stack - scratch from programStack(prog), reused between calls
 */
export function evalProgram(prog: Program, stack: Float64Array, x: number, y: number, z: number): number {
  const code = prog.code;
  const p = prog.params;
  let sp = 0;
  for (let pc = 0; pc < code.length; pc += 2) {
    const o = code[pc + 1];
    switch (code[pc]) {
      case OP_SPHERE: {
        stack[sp++] = Math.sqrt((x - p[o]) ** 2 + (y - p[o + 1]) ** 2 + (z - p[o + 2]) ** 2) - p[o + 3];
        break;
      }
      case OP_ELLIPSOID: {
        const dx = x - p[o];
        const dy = y - p[o + 1];
        const dz = z - p[o + 2];
        const lx = (dx * p[o + 6] + dy * p[o + 7] + dz * p[o + 8]) / p[o + 3];
        const ly = (dx * p[o + 9] + dy * p[o + 10] + dz * p[o + 11]) / p[o + 4];
        const lz = (dx * p[o + 12] + dy * p[o + 13] + dz * p[o + 14]) / p[o + 5];
        const k0 = Math.sqrt(lx * lx + ly * ly + lz * lz);
        const k1 = Math.sqrt((lx / p[o + 3]) ** 2 + (ly / p[o + 4]) ** 2 + (lz / p[o + 5]) ** 2);
        stack[sp++] = k1 > 1e-12 ? (k0 * (k0 - 1)) / k1 : -Math.min(p[o + 3], p[o + 4], p[o + 5]);
        break;
      }
      case OP_CAPSULE: {
        const ax = p[o];
        const ay = p[o + 1];
        const az = p[o + 2];
        const bx = p[o + 3] - ax;
        const by = p[o + 4] - ay;
        const bz = p[o + 5] - az;
        const px = x - ax;
        const py = y - ay;
        const pz = z - az;
        const bb = bx * bx + by * by + bz * bz;
        let h = bb > 0 ? (px * bx + py * by + pz * bz) / bb : 0;
        h = h < 0 ? 0 : h > 1 ? 1 : h;
        const qx = px - bx * h;
        const qy = py - by * h;
        const qz = pz - bz * h;
        stack[sp++] = Math.sqrt(qx * qx + qy * qy + qz * qz) - (p[o + 6] + (p[o + 7] - p[o + 6]) * h);
        break;
      }
      case OP_BOX: {
        const dx = x - p[o];
        const dy = y - p[o + 1];
        const dz = z - p[o + 2];
        const round = p[o + 15];
        const qx = Math.abs(dx * p[o + 6] + dy * p[o + 7] + dz * p[o + 8]) - p[o + 3] + round;
        const qy = Math.abs(dx * p[o + 9] + dy * p[o + 10] + dz * p[o + 11]) - p[o + 4] + round;
        const qz = Math.abs(dx * p[o + 12] + dy * p[o + 13] + dz * p[o + 14]) - p[o + 5] + round;
        const ox = qx > 0 ? qx : 0;
        const oy = qy > 0 ? qy : 0;
        const oz = qz > 0 ? qz : 0;
        const inner = Math.max(qx, qy, qz);
        stack[sp++] = Math.sqrt(ox * ox + oy * oy + oz * oz) + (inner < 0 ? inner : 0) - round;
        break;
      }
      case OP_PLANE:
        stack[sp++] = (x - p[o]) * p[o + 3] + (y - p[o + 1]) * p[o + 4] + (z - p[o + 2]) * p[o + 5];
        break;
      case OP_UNION: {
        const b = stack[--sp];
        const a = stack[sp - 1];
        stack[sp - 1] = smoothMin(a, b, p[o]);
        break;
      }
      case OP_INTERSECT: {
        const b = stack[--sp];
        const a = stack[sp - 1];
        stack[sp - 1] = -smoothMin(-a, -b, p[o]);
        break;
      }
      case OP_SUBTRACT: {
        const b = stack[--sp];
        const a = stack[sp - 1];
        stack[sp - 1] = -smoothMin(-a, b, p[o]);
        break;
      }
      case OP_OFFSET:
        stack[sp - 1] -= p[o];
        break;
    }
  }
  return stack[0];
}

/** Polynomial smooth minimum with blend width k mm (k <= 0: plain minimum). */
export function smoothMin(a: number, b: number, k: number): number {
  if (k <= 0) return a < b ? a : b;
  let h = 0.5 + (0.5 * (b - a)) / k;
  h = h < 0 ? 0 : h > 1 ? 1 : h;
  return b + (a - b) * h - k * h * (1 - h);
}

/** Signed distance of a shape at one point (compiles on every call: for tests and setup only). */
export function shapeDistance(shape: Shape, x: number, y: number, z: number): number {
  const prog = compileShape(shape);
  return evalProgram(prog, programStack(prog), x, y, z);
}
