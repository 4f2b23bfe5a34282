/** `coxa resample`: apply a stored transform to any image, onto any grid. */
import { Command, Option } from "commander";
import { applyTransformFile } from "../resample/apply-transform.js";
import { INTERPS, type Interp } from "../resample/kernels.js";
import { integerIn, numberIn } from "./parse.js";
import { createProgressBar } from "./progress.js";
import type { CliContext } from "./run.js";

export function resampleCommand(ctx: CliContext): Command {
  return new Command("resample")
    .description(
      "Resample an image onto another image's grid through a stored coxa transform (labels: --interp nearest).",
    )
    .requiredOption("--image <img>", "image to resample (usually in the moving image's world)")
    .requiredOption("--onto <img>", "image whose grid the output takes (usually the fixed image)")
    .requiredOption("--transform <json>", "transform.json written by coxa align")
    .requiredOption("--out <img>", "output image (.nii or .nii.gz)")
    .addOption(new Option("--interp <kind>", "interpolation").choices(INTERPS).default("linear"))
    .option("--inverse", "use the inverse transform (resample a fixed-space image onto a moving grid)")
    .option("--float", "write float32 instead of the input's datatype")
    .addOption(
      new Option("--fill <value>", "value where the image has no data").argParser(numberIn()).default(0),
    )
    .addOption(
      new Option("--threads <n>", "worker threads (default: all cores)").argParser(integerIn(1, 256)),
    )
    .option("--json", "print the result as JSON only")
    .option("--quiet", "no progress bar and no message")
    .addHelpText(
      "after",
      "\nExample:\n  coxa resample --image data-synthetic/labels-mr.nii.gz --onto data-synthetic/ct.nii.gz \\\n    --transform out/demo/transform.json --interp nearest --out out/labels-mr-on-ct.nii.gz\n",
    )
    .action(
      async (flags: {
        image: string;
        onto: string;
        transform: string;
        out: string;
        interp: Interp;
        inverse?: boolean;
        float?: boolean;
        fill: number;
        threads?: number;
        json?: boolean;
        quiet?: boolean;
      }) => {
        const bar = createProgressBar(ctx.io, !flags.quiet && !flags.json);
        try {
          const r = await applyTransformFile({ ...flags, onProgress: bar.update });
          bar.done();
          if (flags.json)
            ctx.io.stdout(
              `${JSON.stringify({ out: r.out, datatype: r.datatype, shape: r.shape, inside_fraction: r.insideFraction }, null, 2)}\n`,
            );
          else if (!flags.quiet) {
            ctx.io.stdout(
              `wrote ${r.out} (${r.shape.join(" x ")}, ${r.datatype}, ${(100 * r.insideFraction).toFixed(1)}% of voxels inside the source image)\n`,
            );
          }
        } finally {
          bar.done();
        }
      },
    );
}
