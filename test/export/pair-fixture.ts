/**
 * Small synthetic CT + MR pairs with exactly known content for the pair-export tests (invented
 * data, not a patient): a CT box of soft tissue in air with a planted metal block, and an MR
 * whose intensity is a linear function of its world coordinates — trilinear interpolation
 * reproduces a linear function exactly, so the resampled MR has a closed form.
 */
import { mkdirSync } from "node:fs";
import { join } from "node:path";
import { sha256File } from "../../src/common/hash.js";
import { compose, type Mat4, transformPoint, translation } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { buildTransformRecord, imageRef, writeTransform } from "../../src/geometry/transform-file.js";
import { writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";

/** MR intensity at a world point (mm) of the MR. */
export function mrValueAt(x: number, y: number, z: number): number {
  return 400 + 2 * x - 3 * y + 0.5 * z;
}

export interface SyntheticPair {
  dir: string;
  ctPath: string;
  mrPath: string;
  transformPath: string;
  ct: Volume<Int16Array>;
  mr: Volume<Float32Array>;
  /** Fixed (CT) world -> moving (MR) world. */
  fixedToMoving: Mat4;
  /** Body box (voxel index ranges, half-open) and metal voxel indices. */
  body: { i: [number, number]; j: [number, number]; k: [number, number] };
  metal: number[];
}

/**
 * Write a synthetic pair into `dir`.
 * @param dir - folder (created)
 * @param options - `ctAffine`: CT index-to-world (default axial 1.5 x 1.5 x 2.5 mm);
 *   `mrShift`: extra MR translation in mm (a large one moves the MR off the CT)
 */
export async function writeSyntheticPair(
  dir: string,
  options: { ctAffine?: Mat4; dims?: [number, number, number]; mrShiftMm?: number } = {},
): Promise<SyntheticPair> {
  mkdirSync(dir, { recursive: true });
  const dims = options.dims ?? [24, 20, 10];
  const [nx, ny, nz] = dims;
  const ctAffine =
    options.ctAffine ?? new Float64Array([1.5, 0, 0, -18, 0, 1.5, 0, -12, 0, 0, 2.5, -40, 0, 0, 0, 1]);
  const data = new Int16Array(nx * ny * nz).fill(-1000);
  const body = {
    i: [3, nx - 3] as [number, number],
    j: [3, ny - 3] as [number, number],
    k: [2, nz - 2] as [number, number],
  };
  for (let k = body.k[0]; k < body.k[1]; k++)
    for (let j = body.j[0]; j < body.j[1]; j++)
      for (let i = body.i[0]; i < body.i[1]; i++)
        data[i + nx * (j + ny * k)] = 20 + ((i * 7 + j * 3 + k) % 50);
  const metal: number[] = [];
  const mi = Math.floor(nx / 2);
  const mj = Math.floor(ny / 2);
  const mk = Math.floor(nz / 2);
  for (let k = mk - 1; k <= mk + 1; k++)
    for (let j = mj; j <= mj + 1; j++)
      for (let i = mi; i <= mi + 1; i++) {
        const q = i + nx * (j + ny * k);
        data[q] = 3000;
        metal.push(q);
      }
  const ct = new Volume(dims, data, ctAffine);
  // MR grid: a larger box around the CT, 1.2 x 1.3 x 2 mm.
  const box = ct.boundsWorld();
  const mrAffine = new Float64Array([
    1.2,
    0,
    0,
    box.min[0] - 15,
    0,
    1.3,
    0,
    box.min[1] - 15,
    0,
    0,
    2,
    box.min[2] - 15,
    0,
    0,
    0,
    1,
  ]);
  const size = [0, 1, 2].map((a) => Math.ceil((box.max[a] - box.min[a] + 30) / [1.2, 1.3, 2][a]) + 1);
  const mrDims: [number, number, number] = [size[0], size[1], size[2]];
  const mrData = new Float32Array(mrDims[0] * mrDims[1] * mrDims[2]);
  const p = [0, 0, 0];
  for (let k = 0; k < mrDims[2]; k++)
    for (let j = 0; j < mrDims[1]; j++)
      for (let i = 0; i < mrDims[0]; i++) {
        transformPoint(p, mrAffine, i, j, k);
        mrData[i + mrDims[0] * (j + mrDims[1] * k)] = mrValueAt(p[0], p[1], p[2]);
      }
  const mr = new Volume(mrDims, mrData, mrAffine);
  const centre = ct.centerWorld();
  const shift = options.mrShiftMm ?? 0;
  const fixedToMoving = compose(translation(shift, 0, 0), rigidMatrix(centre, [2, -1, 5], [3, -2, 1]));
  const ctPath = join(dir, "ct.nii.gz");
  const mrPath = join(dir, "mr.nii.gz");
  writeNifti(ctPath, ct, { datatype: "int16" });
  writeNifti(mrPath, mr, { datatype: "float32" });
  const transformPath = join(dir, "transform.json");
  writeTransform(
    transformPath,
    buildTransformRecord({
      model: "rigid",
      matrix: fixedToMoving,
      centerMm: centre,
      fixed: imageRef(ctPath, ct, await sha256File(ctPath)),
      moving: imageRef(mrPath, mr, await sha256File(mrPath)),
    }),
  );
  return { dir, ctPath, mrPath, transformPath, ct, mr, fixedToMoving, body, metal };
}
