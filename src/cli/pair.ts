/** `coxa pair`: two-channel (CT + MR) training export of an aligned case. */
import { Command, InvalidArgumentError, Option } from "commander";
import { DEFAULT_CT_LEVEL_HU, DEFAULT_CT_WIDTH_HU, DEFAULT_MR_PERCENTILES } from "../export/normalize.js";
import { exportPair, type PairNormalize } from "../export/pair.js";
import { DEFAULT_METAL_HU } from "../masks/metal.js";
import { integerIn, numberIn, numberList } from "./parse.js";
import { createProgressBar } from "./progress.js";
import type { CliContext } from "./run.js";

interface PairCliOptions {
  fixed: string;
  moving: string;
  transform: string;
  out: string;
  slices?: boolean;
  normalize: PairNormalize;
  ctLevel: number;
  ctWidth: number;
  mrPercentiles: number[];
  metalHu: number;
  minBodyFraction: number;
  case?: string;
  threads?: number;
  json?: boolean;
  quiet?: boolean;
}

/** "low,high" percentiles, 0 <= low < high <= 100. */
export function percentilePair(raw: string): [number, number] {
  const v = numberList(0, 100, 2)(raw);
  if (v.length !== 2 || !(v[0] < v[1])) {
    throw new InvalidArgumentError(`"${raw}" is not two percentiles low,high with low < high.`);
  }
  return [v[0], v[1]];
}

/** The pair-export options shared by `coxa pair` and `coxa batch --pair`. */
export function addPairExportOptions(cmd: Command): Command {
  return cmd
    .option(
      "--slices",
      "also write axial slices as NumPy .npy files (float32 [CT, MR, metal]) and slices.csv",
    )
    .addOption(
      new Option(
        "--normalize <mode>",
        "none: CT in HU, MR as is; window: CT window and MR percentiles mapped to 0..1",
      )
        .choices(["none", "window"])
        .default("none"),
    )
    .addOption(
      new Option("--ct-level <hu>", "CT window centre for --normalize window (HU)")
        .argParser(numberIn())
        .default(DEFAULT_CT_LEVEL_HU),
    )
    .addOption(
      new Option("--ct-width <hu>", "CT window width for --normalize window (HU)")
        .argParser(numberIn(1e-6))
        .default(DEFAULT_CT_WIDTH_HU),
    )
    .addOption(
      new Option("--mr-percentiles <low,high>", "MR percentiles inside the body mapped to 0 and 1")
        .argParser(percentilePair)
        .default([...DEFAULT_MR_PERCENTILES], DEFAULT_MR_PERCENTILES.join(",")),
    )
    .addOption(
      new Option("--min-body-fraction <f>", "skip slices whose body fraction is at or below this")
        .argParser(numberIn(0, 0.999))
        .default(0),
    );
}

export function pairCommand(ctx: CliContext): Command {
  const cmd = new Command("pair")
    .description(
      "Export an aligned CT + MR pair for training: pair.nii.gz (4-D, vol 0 CT, vol 1 MR on the CT grid), metal.nii.gz, pair.json, optional .npy slices.",
    )
    .requiredOption("--fixed <img>", "CT (HU), the fixed image of the transform")
    .requiredOption("--moving <img>", "MR, the moving image of the transform")
    .requiredOption("--transform <json>", "transform.json (fixed to moving) from coxa align")
    .requiredOption("--out <dir>", "output directory (created if absent)");
  addPairExportOptions(cmd);
  return cmd
    .addOption(
      new Option("--metal-hu <hu>", "metal threshold of the mask (HU; no margin is added)")
        .argParser(numberIn())
        .default(DEFAULT_METAL_HU),
    )
    .option("--case <name>", "case name written into slices.csv (default: the output folder's name)")
    .addOption(
      new Option("--threads <n>", "worker threads (default: all cores)").argParser(integerIn(1, 256)),
    )
    .option("--json", "print pair.json only")
    .option("--quiet", "no progress bar")
    .addHelpText(
      "after",
      "\nExample:\n  coxa pair --fixed case/ct.nii.gz --moving case/mr.nii.gz --transform out/transform.json --out out/pair --slices --normalize window\n",
    )
    .action(async (opts: PairCliOptions) => {
      const bar = createProgressBar(ctx.io, !opts.quiet && !opts.json);
      let result: Awaited<ReturnType<typeof exportPair>>;
      try {
        result = await exportPair({
          fixed: opts.fixed,
          moving: opts.moving,
          transform: opts.transform,
          out: opts.out,
          slices: opts.slices ?? false,
          normalize: opts.normalize,
          ctLevelHu: opts.ctLevel,
          ctWidthHu: opts.ctWidth,
          mrPercentiles: [opts.mrPercentiles[0], opts.mrPercentiles[1]],
          metalHu: opts.metalHu,
          minBodyFraction: opts.minBodyFraction,
          caseName: opts.case,
          threads: opts.threads,
          onProgress: bar.update,
        });
      } finally {
        bar.done();
      }
      const s = result.sidecar;
      if (opts.json) {
        ctx.io.stdout(`${JSON.stringify(s, null, 2)}\n`);
        return;
      }
      for (const w of s.warnings) ctx.io.stderr(`coxa: warning: ${w}\n`);
      const lines = [
        `wrote ${result.files.pair} (CT + MR on the CT grid ${s.grid.shape.join(" x ")}, ${s.normalize.mode === "window" ? "normalised to 0..1" : "CT in HU"})`,
        `  MR covers ${(100 * s.resampling.mr_coverage_fraction).toFixed(1)} % of the CT grid; metal ${s.metal.voxels} voxels (>= ${s.metal.threshold_hu} HU, no margin) in ${result.files.metal}`,
      ];
      if (s.slices) {
        lines.push(
          `  ${s.slices.written} slices [3, ${s.slices.shape[1]}, ${s.slices.shape[2]}] in ${s.slices.folder}/ (${s.slices.skipped} without body skipped), listed in slices.csv`,
        );
      }
      lines.push(`  sidecar ${result.files.sidecar}`);
      ctx.io.stdout(`${lines.join("\n")}\n`);
    });
}
