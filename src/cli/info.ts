/** `coxa info IMG`: geometry, datatype, intensities and metal count of one image. */
import { Command, Option } from "commander";
import { describeImage } from "../image/describe.js";
import { MAX_VOXELS_LIMIT } from "../image/nifti-read.js";
import { integerIn, numberIn } from "./parse.js";
import type { CliContext } from "./run.js";

export function infoCommand(ctx: CliContext): Command {
  return new Command("info")
    .description(
      "Describe a NIfTI image: shape, spacing, orientation, affine, datatype, intensity range, metal voxels (CT).",
    )
    .argument("<img>", "NIfTI-1/2 image (.nii or .nii.gz)")
    .addOption(new Option("--volume <n>", "0-based volume of a 4-D image").argParser(integerIn(0)).default(0))
    .addOption(
      new Option("--max-voxels <n>", "refuse images with more voxels")
        .argParser(integerIn(1, MAX_VOXELS_LIMIT))
        .default(MAX_VOXELS_LIMIT),
    )
    .addOption(
      new Option("--metal-hu <hu>", "metal threshold for CT-like images (HU)")
        .argParser(numberIn())
        .default(2500),
    )
    .option("--json", "print the description as JSON only")
    .addHelpText("after", "\nExample:\n  coxa info data-synthetic/ct.nii.gz --json\n")
    .action(
      async (img: string, opts: { volume: number; maxVoxels: number; metalHu: number; json?: boolean }) => {
        const d = await describeImage(img, {
          volume: opts.volume,
          maxVoxels: opts.maxVoxels,
          metalHu: opts.metalHu,
        });
        if (opts.json) {
          ctx.io.stdout(`${JSON.stringify(d, null, 2)}\n`);
          return;
        }
        const fmt = (v: number) => (Number.isInteger(v) ? String(v) : v.toFixed(3));
        const lines = [
          `${d.path}`,
          `  NIfTI-${d.nifti_version}, ${d.datatype}, shape ${d.shape.join(" x ")}${d.frames > 1 ? ` (volume ${d.volume} of ${d.frames})` : ""}`,
          `  spacing ${d.spacing_mm.map(fmt).join(" x ")} mm, orientation ${d.orientation}, affine from ${d.affine_source}`,
          ...d.index_to_world
            .slice(0, 3)
            .map((r) => `    [${r.map((v) => v.toFixed(4).padStart(11)).join(" ")} ]`),
          `  intensity min ${fmt(d.min)}, max ${fmt(d.max)}, mean ${d.mean.toFixed(3)}${d.scl_slope !== 0 ? ` (scl_slope ${d.scl_slope}, scl_inter ${d.scl_inter})` : ""}`,
          `  ${d.modality_reason}`,
        ];
        if (d.metal_voxels !== undefined)
          lines.push(`  metal voxels (>= ${d.metal_hu} HU): ${d.metal_voxels}`);
        ctx.io.stdout(`${lines.join("\n")}\n`);
      },
    );
}
