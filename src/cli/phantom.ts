/** `coxa phantom`: write a synthetic hip CT + MR case with known truth. */
import { Command, Option } from "commander";
import { PHANTOM_DEFAULTS, type PhantomSummary, writePhantomCase } from "../phantom/phantom.js";
import { integerIn, numberIn } from "./parse.js";
import { createProgressBar } from "./progress.js";
import type { CliContext } from "./run.js";

interface PhantomCliOptions {
  out: string;
  seed: number;
  size: "demo" | "clinical";
  implant: "left" | "right" | "both" | "none";
  severity: number;
  poseDeg: number;
  mrFov: "full" | "implant";
  threads?: number;
  force?: boolean;
  json?: boolean;
  quiet?: boolean;
}

/** The `coxa phantom` command: options parsed into writePhantomCase, summary printed. */
export function phantomCommand(ctx: CliContext): Command {
  return new Command("phantom")
    .description(
      "Write a synthetic hip CT + MR pair with a hip implant, labels, landmarks and the true CT->MR transform (synthetic data, not a patient).",
    )
    .requiredOption("--out <dir>", "output directory (created if absent)")
    .addOption(new Option("--seed <n>", "random seed").argParser(integerIn(0)).default(PHANTOM_DEFAULTS.seed))
    .addOption(
      new Option("--size <size>", "grid sizes").choices(["demo", "clinical"]).default(PHANTOM_DEFAULTS.size),
    )
    .addOption(
      new Option("--implant <side>", "implanted hip(s)")
        .choices(["left", "right", "both", "none"])
        .default(PHANTOM_DEFAULTS.implant),
    )
    .addOption(
      new Option("--severity <s>", "artifact strength, 0 (metal, no artifacts) to 1")
        .argParser(numberIn(0, 1))
        .default(PHANTOM_DEFAULTS.severity),
    )
    .addOption(
      new Option("--pose-deg <deg>", "largest pose rotation per axis between CT and MR, degrees")
        .argParser(numberIn(0, 20))
        .default(PHANTOM_DEFAULTS.poseDeg),
    )
    .addOption(
      new Option("--mr-fov <fov>", "MR field of view: whole pelvis or the implanted hip only")
        .choices(["full", "implant"])
        .default(PHANTOM_DEFAULTS.mrFov),
    )
    .addOption(
      new Option("--threads <n>", "worker threads (default: all cores)").argParser(integerIn(1, 256)),
    )
    .option("--force", "replace phantom files already in the output directory")
    .option("--json", "print the summary as JSON only")
    .option("--quiet", "no progress bar")
    .addHelpText("after", "\nExample:\n  coxa phantom --out /tmp/p --seed 7 --implant right --severity 1\n")
    .action(async (opts: PhantomCliOptions) => {
      const bar = createProgressBar(ctx.io, !opts.quiet && !opts.json);
      let summary: PhantomSummary;
      try {
        summary = await writePhantomCase({
          outDir: opts.out,
          seed: opts.seed,
          size: opts.size,
          implant: opts.implant,
          severity: opts.severity,
          poseDeg: opts.poseDeg,
          mrFov: opts.mrFov,
          threads: opts.threads,
          force: opts.force,
          onProgress: bar.update,
        });
      } finally {
        bar.done();
      }
      if (opts.json) {
        ctx.io.stdout(`${JSON.stringify(summary, null, 2)}\n`);
        return;
      }
      const total = Object.values(summary.timing_s).reduce((a, b) => a + b, 0);
      ctx.io.stdout(
        `${[
          `wrote synthetic phantom (seed ${summary.seed}, ${summary.size}, implant ${summary.implant}, severity ${summary.severity}, MR field of view ${summary.mr_fov}) to ${summary.out_dir}`,
          `  CT ${summary.ct_shape.join(" x ")}, MR ${summary.mr_shape.join(" x ")}, ${summary.landmarks} landmarks`,
          `  true pose: rotation ${summary.rotation_deg.map((v) => v.toFixed(2)).join(", ")} deg, translation ${summary.translation_mm.map((v) => v.toFixed(2)).join(", ")} mm`,
          `  ${summary.ct_metal_slices} CT slices hold metal; largest kept MR readout displacement ${summary.mr_max_displacement_mm.toFixed(1)} mm`,
          `  files: ${summary.files.join(", ")}  (${total.toFixed(1)} s)`,
        ].join("\n")}\n`,
      );
    });
}
