/** `coxa stress`: does registration of this pair survive implant shadowing and a poor start? */
import { Command, InvalidArgumentError, Option } from "commander";
import type { TransformModel } from "../geometry/transform-model.js";
import type { MetricKind } from "../metrics/metric.js";
import { runStress, STRESS_DEFAULTS } from "../stress/stress.js";
import { formatSeverity } from "../stress/summary.js";
import { integerIn, numberIn, numberList } from "./parse.js";
import { createProgressBar } from "./progress.js";
import { addRegistrationOptions } from "./registration-options.js";
import type { CliContext } from "./run.js";

interface StressFlags {
  fixed: string;
  moving: string;
  out: string;
  reference?: string;
  truth?: string;
  fixedLandmarks?: string;
  movingLandmarks?: string;
  lps?: boolean;
  trials: number;
  severities: number[];
  offsetMm: number;
  offsetDeg: number;
  successMm: number;
  virtualImplant?: [number, number, number];
  virtualSide?: "left" | "right";
  readoutAxis: "i" | "j" | "k";
  search: boolean;
  model: TransformModel;
  metric: MetricKind;
  levels: number[];
  metalHu: number;
  metalMarginMm: number;
  seed: number;
  threads?: number;
  saveImages?: boolean;
  json?: boolean;
  quiet?: boolean;
}

/** Three comma-separated numbers (a world point in mm). */
function point3(raw: string): [number, number, number] {
  const values = numberList(-1e6, 1e6, 3)(raw);
  if (values.length !== 3) throw new InvalidArgumentError(`"${raw}" is not three numbers X,Y,Z.`);
  return [values[0], values[1], values[2]];
}

const HELP_AFTER = `
For each severity, artifacts are added once (seeded) to both images with the phantom's physics:
CT beam hardening and photon starvation streaks from the metal in the CT, MR signal void and
readout displacement around that metal mapped into the MR by the reference. Severity 0 is the
inputs as given (plus the virtual implant, without artifacts). Each trial starts from the
reference perturbed by a seeded rigid offset (translation up to --offset-mm, rotation up to
--offset-deg, about the implant) and is registered with the metal mask on and off from the same
start. error_mm compares the result with the reference: the mean over the fixed landmarks of
|T(p) - T_ref(p)| when --fixed-landmarks is given, else the RMS over points within 60 mm of the
implant. A trial succeeds when error_mm <= --success-mm.

Writes into OUT: stress.json, stress.csv (severity,trial,offset_mm,offset_deg,mask,error_mm,
success,seconds,verdict), stress.html, trials/<severity>-<trial>-<on|off>.json (coxa transform
files) and, with --save-images, images/ct-<severity>.nii.gz and images/mr-<severity>.nii.gz.
The same seed reproduces every row except the seconds column.

Exit codes: 0 done; 3 done, but with the metal mask fewer than 95% of the trials succeeded at the
lowest severity tested; 2 bad input (nothing written); 1 internal error.

Examples:
  coxa stress --fixed data-synthetic/ct.nii.gz --moving data-synthetic/mr.nii.gz \\
    --truth data-synthetic/truth.json --virtual-implant -91.4,10.1,-157.9 \\
    --trials 3 --severities 0,1 --out out/stress-second-hip
  coxa stress --fixed data-synthetic/ct.nii.gz --moving data-synthetic/mr.nii.gz \\
    --truth data-synthetic/truth.json --trials 5 --severities 0,0.5,1 --out out/stress
`;

/** The `coxa stress` command: options parsed into runStress, summary printed. */
export function stressCommand(ctx: CliContext): Command {
  return addRegistrationOptions(
    new Command("stress")
      .description(
        "Measure how much implant shadowing and how large a starting offset registration of a CT-MR pair survives.",
      )
      .requiredOption("--fixed <img>", "fixed image: the CT (NIfTI, HU)")
      .requiredOption("--moving <img>", "moving image: the MR (NIfTI)")
      .requiredOption("--out <dir>", "output folder (created if absent)"),
  )
    .option("--reference <json>", "accepted transform of the pair (coxa transform.json, checked by sha256)")
    .option("--truth <json>", "a phantom's truth.json (its fixed_to_moving is the reference)")
    .option(
      "--fixed-landmarks <csv>",
      "fixed landmarks (label,x,y,z; RAS mm): error = mean |T(p) - T_ref(p)| over them",
    )
    .option("--moving-landmarks <csv>", "moving landmarks: adds the landmark gate to each trial's verdict")
    .option("--lps", "landmark files are in LPS (x and y flipped on input)")
    .addOption(
      new Option("--trials <n>", "trials per severity")
        .argParser(integerIn(1, STRESS_DEFAULTS.maxTrials))
        .default(STRESS_DEFAULTS.trials),
    )
    .addOption(
      new Option("--severities <list>", "artifact severities, each in 0..1")
        .argParser(numberList(0, 1))
        .default([...STRESS_DEFAULTS.severities], STRESS_DEFAULTS.severities.map(formatSeverity).join(",")),
    )
    .addOption(
      new Option("--offset-mm <mm>", "largest starting translation (mm)")
        .argParser(numberIn(0, 1000))
        .default(STRESS_DEFAULTS.offsetMm),
    )
    .addOption(
      new Option("--offset-deg <deg>", "largest starting rotation (degrees)")
        .argParser(numberIn(0, STRESS_DEFAULTS.maxOffsetDeg))
        .default(STRESS_DEFAULTS.offsetDeg),
    )
    .addOption(
      new Option("--success-mm <mm>", "a trial succeeds when its error is at most this (mm)")
        .argParser(numberIn(1e-6, 1000))
        .default(STRESS_DEFAULTS.successMm),
    )
    .addOption(
      new Option(
        "--virtual-implant <x,y,z>",
        "place a synthetic hip implant (head centre) at this CT world point (mm)",
      ).argParser(point3),
    )
    .addOption(
      new Option("--virtual-side <side>", "side of the virtual implant (default: from the point)").choices([
        "left",
        "right",
      ]),
    )
    .addOption(
      new Option("--readout-axis <axis>", "MR voxel axis of the readout (frequency encoding)")
        .choices(["i", "j", "k"])
        .default("i"),
    )
    .option("--no-search", "skip the coarse global search (measures the local capture range alone)")
    .addOption(
      new Option("--seed <n>", "random seed (poses, artifacts, sampling)")
        .argParser(integerIn(0, 2 ** 31 - 1))
        .default(STRESS_DEFAULTS.seed),
    )
    .addOption(
      new Option("--threads <n>", "worker threads (default: all cores)").argParser(integerIn(1, 256)),
    )
    .option("--save-images", "also write each severity's CT and MR into OUT/images/")
    .option("--json", "print stress.json only")
    .option("--quiet", "no progress bar and no summary on stdout")
    .addHelpText("after", HELP_AFTER)
    .action(async (flags: StressFlags) => {
      const bar = createProgressBar(ctx.io, !flags.quiet && !flags.json);
      let result: Awaited<ReturnType<typeof runStress>>;
      try {
        result = await runStress({
          fixed: flags.fixed,
          moving: flags.moving,
          out: flags.out,
          reference: flags.reference,
          truth: flags.truth,
          fixedLandmarks: flags.fixedLandmarks,
          movingLandmarks: flags.movingLandmarks,
          lps: flags.lps,
          trials: flags.trials,
          severities: flags.severities,
          offsetMm: flags.offsetMm,
          offsetDeg: flags.offsetDeg,
          successMm: flags.successMm,
          virtualImplant: flags.virtualImplant,
          virtualSide: flags.virtualSide,
          readoutAxis: flags.readoutAxis === "i" ? 0 : flags.readoutAxis === "j" ? 1 : 2,
          globalSearch: flags.search,
          model: flags.model,
          metric: flags.metric,
          levelsMm: flags.levels,
          metalHu: flags.metalHu,
          metalMarginMm: flags.metalMarginMm,
          seed: flags.seed,
          threads: flags.threads,
          saveImages: flags.saveImages,
          onProgress: bar.update,
        });
      } finally {
        bar.done();
      }
      const doc = result.document;
      if (flags.json) ctx.io.stdout(`${JSON.stringify(doc, null, 2)}\n`);
      else if (!flags.quiet) {
        const lines = [doc.conclusion.text];
        for (const r of doc.severity_results) {
          const part = (m: "on" | "off") =>
            `mask ${m} ${r.modes[m].successes}/${r.modes[m].trials}` +
            (r.modes[m].median_error_mm !== null
              ? ` (median ${r.modes[m].median_error_mm.toFixed(2)} mm)`
              : "");
          lines.push(`  severity ${formatSeverity(r.severity)}: ${part("on")}, ${part("off")}`);
        }
        lines.push(`time: ${doc.timing_s.total.toFixed(1)} s`);
        lines.push(`report: ${result.files.html}`);
        ctx.io.stdout(`${lines.join("\n")}\n`);
      }
      if (result.exitCode === 3) ctx.io.stderr(`coxa: ${doc.exit_reason}\n`);
      ctx.exitCode = result.exitCode;
    });
}
