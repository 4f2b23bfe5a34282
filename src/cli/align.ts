/** `coxa align`: register MR to CT (or any pair), write transform, resampled image, summary and report. */
import { Command, Option } from "commander";
import type { TransformModel } from "../geometry/transform-model.js";
import type { Modality } from "../image/modality.js";
import type { MetricKind } from "../metrics/metric.js";
import { alignPair } from "../register/align.js";
import { REGISTER_DEFAULTS } from "../register/driver.js";
import { INIT_METHODS, type InitMethod } from "../register/initialise.js";
import { DEFAULT_THRESHOLDS } from "../register/quality.js";
import { integerIn, numberIn } from "./parse.js";
import { createProgressBar } from "./progress.js";
import { addRegistrationOptions } from "./registration-options.js";
import type { CliContext } from "./run.js";

interface AlignFlags {
  fixed: string;
  moving: string;
  out: string;
  model: TransformModel;
  metric: MetricKind;
  levels: number[];
  metalHu: number;
  metalMarginMm: number;
  metalMask: boolean;
  fixedModality?: Modality;
  movingModality?: Modality;
  fixedMask?: string;
  movingMask?: string;
  fixedLandmarks?: string;
  movingLandmarks?: string;
  lps?: boolean;
  fixedLabels?: string;
  movingLabels?: string;
  init: InitMethod;
  seed: number;
  threads?: number;
  trePassMm: number;
  treReviewMm: number;
  inverseReviewMm: number;
  json?: boolean;
  quiet?: boolean;
}

export function alignCommand(ctx: CliContext): Command {
  return addRegistrationOptions(
    new Command("align")
      .description(
        "Register the moving image (usually MR) to the fixed image (usually CT), ignoring metal, and judge the result.",
      )
      .requiredOption("--fixed <img>", "fixed image (NIfTI), usually the CT")
      .requiredOption("--moving <img>", "moving image (NIfTI), usually the MR")
      .requiredOption("--out <dir>", "output folder (created if absent)"),
  )
    .option("--no-metal-mask", "use metal and its margin in the metric (not recommended)")
    .addOption(
      new Option("--fixed-modality <m>", "override the detected modality of the fixed image").choices([
        "ct",
        "mr",
        "other",
      ]),
    )
    .addOption(
      new Option("--moving-modality <m>", "override the detected modality of the moving image").choices([
        "ct",
        "mr",
        "other",
      ]),
    )
    .option("--fixed-mask <img>", "only use fixed voxels where this mask is nonzero")
    .option("--moving-mask <img>", "only use moving voxels where this mask is nonzero")
    .option("--fixed-landmarks <csv>", "landmarks in the fixed image (label,x,y,z; RAS mm)")
    .option("--moving-landmarks <csv>", "the same landmarks in the moving image")
    .option("--lps", "landmark files are in LPS (x and y flipped on input)")
    .option("--fixed-labels <img>", "fixed label map, for Dice after label propagation")
    .option("--moving-labels <img>", "moving label map")
    .addOption(
      new Option("--init <method>", "starting transform")
        .choices(INIT_METHODS)
        .default(REGISTER_DEFAULTS.init),
    )
    .addOption(
      new Option("--seed <n>", "random seed (sampling, search)")
        .argParser(integerIn(0, 2 ** 31 - 1))
        .default(REGISTER_DEFAULTS.seed),
    )
    .addOption(
      new Option(
        "--threads <n>",
        "threads for the metric and resampling (default: all cores for images of 8 million voxels or more, else 1)",
      ).argParser(integerIn(1, 256)),
    )
    .addOption(
      new Option("--tre-pass-mm <mm>", "mean landmark TRE that still passes")
        .argParser(numberIn(0, 1000))
        .default(DEFAULT_THRESHOLDS.trePassMm),
    )
    .addOption(
      new Option("--tre-review-mm <mm>", "mean landmark TRE above which the result fails")
        .argParser(numberIn(0, 1000))
        .default(DEFAULT_THRESHOLDS.treReviewMm),
    )
    .addOption(
      new Option("--inverse-review-mm <mm>", "inverse-consistency mismatch that needs review")
        .argParser(numberIn(0, 1000))
        .default(DEFAULT_THRESHOLDS.inverseConsistencyReviewMm),
    )
    .option("--json", "print summary.json only")
    .option("--quiet", "no progress bar and no summary on stdout")
    .addHelpText(
      "after",
      "\nExit codes: 0 pass or review, 3 fail (outputs still written), 2 bad input, 1 internal error.\n\nExample:\n  coxa align --fixed data-synthetic/ct.nii.gz --moving data-synthetic/mr.nii.gz \\\n    --fixed-landmarks data-synthetic/landmarks-ct.csv --moving-landmarks data-synthetic/landmarks-mr.csv --out out/demo\n",
    )
    .action(async (flags: AlignFlags) => {
      const bar = createProgressBar(ctx.io, !flags.quiet && !flags.json);
      let result: Awaited<ReturnType<typeof alignPair>>;
      try {
        result = await alignPair({
          fixed: flags.fixed,
          moving: flags.moving,
          out: flags.out,
          model: flags.model,
          metric: flags.metric,
          levelsMm: flags.levels,
          metalHu: flags.metalHu,
          metalMarginMm: flags.metalMarginMm,
          metalMask: flags.metalMask,
          fixedModality: flags.fixedModality,
          movingModality: flags.movingModality,
          fixedMask: flags.fixedMask,
          movingMask: flags.movingMask,
          fixedLandmarks: flags.fixedLandmarks,
          movingLandmarks: flags.movingLandmarks,
          lps: flags.lps,
          fixedLabels: flags.fixedLabels,
          movingLabels: flags.movingLabels,
          init: flags.init,
          seed: flags.seed,
          threads: flags.threads,
          thresholds: {
            trePassMm: flags.trePassMm,
            treReviewMm: flags.treReviewMm,
            inverseConsistencyReviewMm: flags.inverseReviewMm,
          },
          onProgress: bar.update,
        });
      } finally {
        bar.done();
      }
      const s = result.summary;
      if (flags.json) ctx.io.stdout(`${JSON.stringify(s, null, 2)}\n`);
      else if (!flags.quiet) {
        const lines = [`verdict: ${s.verdict.toUpperCase()}`];
        for (const r of s.reasons) lines.push(`  - ${r}`);
        if (s.landmarks) {
          lines.push(
            `landmark TRE: mean ${s.landmarks.tre_mm.mean.toFixed(2)} mm, max ${s.landmarks.tre_mm.max.toFixed(2)} mm (${s.landmarks.count} points)`,
          );
        }
        if (s.labels)
          lines.push(
            `label overlap: mean Dice ${s.labels.mean_dice.toFixed(3)} over ${s.labels.per_label.length} labels`,
          );
        lines.push(
          `CT-like image: ${s.ct_image}; metal excluded: ${s.masks.fixed.metal_excluded || s.masks.moving.metal_excluded ? "yes" : "no"}`,
        );
        lines.push(`time: ${s.timing_s.total.toFixed(1)} s`);
        lines.push(`report: ${result.files.report}`);
        ctx.io.stdout(`${lines.join("\n")}\n`);
      }
      if (s.verdict === "fail") ctx.io.stderr(`coxa: verdict fail: ${s.reasons.join(" ")}\n`);
      else if (s.verdict === "review" && !flags.json)
        ctx.io.stderr(`coxa: verdict review: ${s.reasons.join(" ")}\n`);
      ctx.exitCode = result.exitCode;
    });
}
