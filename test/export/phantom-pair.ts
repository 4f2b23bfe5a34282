/**
 * Synthetic phantom cases for system tests (coxa's own phantom, invented anatomy, not a
 * patient): writes the case and a transform.json holding the phantom's true CT->MR transform,
 * so the export can be tested without running a registration.
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { fromRows } from "../../src/geometry/mat4.js";
import { buildTransformRecord, imageRefForFile, writeTransform } from "../../src/geometry/transform-file.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { writePhantomCase } from "../../src/phantom/phantom.js";

/** Paths of one phantom case. */
export interface PhantomCaseFiles {
  dir: string;
  ct: string;
  mr: string;
  landmarksCt: string;
  landmarksMr: string;
  labelsCt: string;
  labelsMr: string;
  /** transform.json with the true fixed (CT) -> moving (MR) transform, or "" when not made. */
  truthTransform: string;
}

/**
 * Write a demo-size phantom into `dir`.
 * @param dir - case folder
 * @param seed - phantom seed
 * @param withTransform - also write truth-transform.json (default true)
 */
export async function writeDemoPhantom(
  dir: string,
  seed: number,
  withTransform = true,
): Promise<PhantomCaseFiles> {
  await writePhantomCase({ outDir: dir, seed, size: "demo", threads: 2 });
  const files: PhantomCaseFiles = {
    dir,
    ct: join(dir, "ct.nii.gz"),
    mr: join(dir, "mr.nii.gz"),
    landmarksCt: join(dir, "landmarks-ct.csv"),
    landmarksMr: join(dir, "landmarks-mr.csv"),
    labelsCt: join(dir, "labels-ct.nii.gz"),
    labelsMr: join(dir, "labels-mr.nii.gz"),
    truthTransform: "",
  };
  if (withTransform) {
    const truth = JSON.parse(readFileSync(join(dir, "truth.json"), "utf8"));
    files.truthTransform = join(dir, "truth-transform.json");
    writeTransform(
      files.truthTransform,
      buildTransformRecord({
        model: "rigid",
        matrix: fromRows(truth.fixed_to_moving),
        centerMm: truth.parameters.center_mm,
        fixed: await imageRefForFile(files.ct, readNifti(files.ct).volume),
        moving: await imageRefForFile(files.mr, readNifti(files.mr).volume),
      }),
    );
  }
  return files;
}
