#!/usr/bin/env node
// PNG previews of a phantom case (or any CT + MR pair with a truth.json): a 2 x 2 panel with CT and
// MR on the same axial plane through the implant (or right hip) and the same coronal plane, the MR
// sampled through the true fixed_to_moving. Needs `npm run build` first.
//
//   node scripts/phantom-previews.mjs DIR [OUT.png]     (default OUT: DIR/preview.png)
//   node scripts/phantom-previews.mjs DIR OUT.png --other-hip   (planes through the other hip)
import { readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { fromRows } from "../dist/geometry/mat4.js";
import { readNifti } from "../dist/image/nifti-read.js";
import { previewPair } from "../dist/phantom/preview.js";

/** Write the preview of the case in `dir` to `out`; returns the PNG path. */
export function writePreview(dir, out = join(dir, "preview.png"), { otherHip = false } = {}) {
  const truth = JSON.parse(readFileSync(join(dir, "truth.json"), "utf8"));
  const ct = readNifti(join(dir, "ct.nii.gz")).volume;
  const mr = readNifti(join(dir, "mr.nii.gz")).volume;
  const centre = otherHip
    ? (truth.other_hip_center_mm ?? truth.hip_centers_mm.left)
    : (truth.implant_center_mm ?? truth.hip_centers_mm.right);
  writeFileSync(
    out,
    previewPair(ct, mr, { centerMm: centre, fixedToMoving: fromRows(truth.fixed_to_moving) }),
  );
  return out;
}

if (import.meta.url === `file://${process.argv[1]}`) {
  const args = process.argv.slice(2).filter((a) => !a.startsWith("--"));
  if (args.length < 1) {
    process.stderr.write("usage: node scripts/phantom-previews.mjs DIR [OUT.png] [--other-hip]\n");
    process.exit(2);
  }
  const path = writePreview(args[0], args[1], { otherHip: process.argv.includes("--other-hip") });
  process.stdout.write(`wrote ${path}\n`);
}
