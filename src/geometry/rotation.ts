/**
 * Rotations and rigid matrices in the coxa convention (design.md): three angles in degrees
 * about the world x, y, z axes applied in that order, R = Rz · Ry · Rx, about an explicit
 * centre c, then a translation t:  T(x) = R (x - c) + c + t.
 */
import type { Mat4 } from "./mat4.js";
import { identity } from "./mat4.js";

const DEG = Math.PI / 180;

/** out (3x3 block of a Mat4, rest identity) = Rz(rz) · Ry(ry) · Rx(rx), angles in degrees. */
export function rotationFromDeg(out: Mat4, rxDeg: number, ryDeg: number, rzDeg: number): Mat4 {
  const cx = Math.cos(rxDeg * DEG),
    sx = Math.sin(rxDeg * DEG);
  const cy = Math.cos(ryDeg * DEG),
    sy = Math.sin(ryDeg * DEG);
  const cz = Math.cos(rzDeg * DEG),
    sz = Math.sin(rzDeg * DEG);
  out[0] = cz * cy;
  out[1] = cz * sy * sx - sz * cx;
  out[2] = cz * sy * cx + sz * sx;
  out[4] = sz * cy;
  out[5] = sz * sy * sx + cz * cx;
  out[6] = sz * sy * cx - cz * sx;
  out[8] = -sy;
  out[9] = cy * sx;
  out[10] = cy * cx;
  out[3] = out[7] = out[11] = 0;
  out[12] = out[13] = out[14] = 0;
  out[15] = 1;
  return out;
}

/**
 * Angles (degrees) [rx, ry, rz] with R = Rz·Ry·Rx for the rotation in the 3x3 block of `m`
 * (assumed orthonormal). ry is in [-90, 90]; at gimbal lock rx is set to 0.
 */
export function degFromRotation(m: Mat4): [number, number, number] {
  const sy = Math.max(-1, Math.min(1, -m[8]));
  const ry = Math.asin(sy);
  let rx: number;
  let rz: number;
  if (Math.abs(sy) < 1 - 1e-12) {
    rx = Math.atan2(m[9], m[10]);
    rz = Math.atan2(m[4], m[0]);
  } else {
    rx = 0;
    rz = Math.atan2(-m[1], m[5]);
  }
  return [rx / DEG, ry / DEG, rz / DEG];
}

/**
 * Rigid matrix T(x) = R (x - c) + c + t.
 * @param centerMm - rotation centre c in world mm
 * @param rotationDeg - [rx, ry, rz] in degrees, R = Rz·Ry·Rx
 * @param translationMm - t in world mm
 */
export function rigidMatrix(
  centerMm: readonly number[],
  rotationDeg: readonly number[],
  translationMm: readonly number[],
): Mat4 {
  const m = rotationFromDeg(identity(), rotationDeg[0], rotationDeg[1], rotationDeg[2]);
  const [cx, cy, cz] = centerMm;
  m[3] = cx + translationMm[0] - (m[0] * cx + m[1] * cy + m[2] * cz);
  m[7] = cy + translationMm[1] - (m[4] * cx + m[5] * cy + m[6] * cz);
  m[11] = cz + translationMm[2] - (m[8] * cx + m[9] * cy + m[10] * cz);
  return m;
}

/** Rotation angle (degrees) of the rotation in the 3x3 block: acos((trace - 1) / 2). */
export function rotationAngleDeg(m: Mat4): number {
  const c = (m[0] + m[5] + m[10] - 1) / 2;
  return Math.acos(Math.max(-1, Math.min(1, c))) / DEG;
}
