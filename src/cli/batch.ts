/** `coxa batch`: align (and export) a whole cohort from a manifest; resumable, sharded. */
import { Command, Option } from "commander";
import { type BatchResult, runBatch, summarizeBatch } from "../batch/batch.js";
import type { BatchAlignSettings, BatchPairSettings } from "../batch/case.js";
import type { CohortRow } from "../batch/cohort.js";
import { parseShard, type Shard, shardFromEnvironment } from "../batch/shard.js";
import { CoxaError } from "../common/errors.js";
import type { PairNormalize } from "../export/pair.js";
import { DEFAULT_METAL_HU } from "../masks/metal.js";
import { addPairExportOptions } from "./pair.js";
import { integerIn, numberIn, numberList } from "./parse.js";
import { createProgressBar } from "./progress.js";
import type { CliContext } from "./run.js";

interface BatchCliOptions {
  out?: string;
  jobs: number;
  shard?: string;
  resume?: boolean;
  confine?: boolean;
  summarize?: string;
  pair?: boolean;
  slices?: boolean;
  normalize: PairNormalize;
  ctLevel: number;
  ctWidth: number;
  mrPercentiles: number[];
  minBodyFraction: number;
  model?: BatchAlignSettings["model"];
  metric?: BatchAlignSettings["metric"];
  levels?: number[];
  metalHu?: number;
  metalMarginMm?: number;
  metalMask?: boolean;
  fixedModality?: BatchAlignSettings["fixedModality"];
  movingModality?: BatchAlignSettings["movingModality"];
  init?: BatchAlignSettings["init"];
  seed?: number;
  lps?: boolean;
  threads?: number;
  json?: boolean;
  quiet?: boolean;
}

const HELP_AFTER = `
Manifest: CSV with the columns case,fixed,moving and optionally fixed_landmarks,moving_landmarks,
fixed_labels,moving_labels; paths relative to the manifest's folder unless absolute. Each case
writes into OUT/<case>/ (align's outputs, with --pair also pair.nii.gz, metal.nii.gz, pair.json);
done.json is written last and records input and output hashes, so --resume skips exactly the
cases that are complete for the current inputs and settings. After the cases: cohort.csv and
cohort.html (a shard writes cohort-shard-K-of-N.* instead; merge with --summarize OUT).

--shard K/N takes every N-th case starting at the K-th (1 <= K <= N); --shard auto reads
SLURM_ARRAY_TASK_ID with SLURM_ARRAY_TASK_COUNT or SLURM_ARRAY_TASK_MIN/MAX.

Exit code: 0 every case done with verdict pass or review; 3 some case has verdict fail or could
not be completed (bad input, crash; the reason is in cohort.csv); 2 bad manifest or options
(nothing is written); 1 internal error.

Examples:
  coxa batch cohort/manifest.csv --out runs/cohort --jobs 2 --pair --slices
  coxa batch cohort/manifest.csv --out runs/cohort --resume --shard auto
  coxa batch --summarize runs/cohort
`;

/** Parse --shard: "K/N" or "auto" (resolved against the environment). */
function resolveShard(spec: string | undefined): Shard | undefined {
  if (spec === undefined) return undefined;
  const parsed = parseShard(spec);
  return parsed === "auto" ? shardFromEnvironment(process.env) : parsed;
}

function rowLine(r: CohortRow): string {
  const tre = r.tre_mean_mm !== null ? `, mean TRE ${r.tre_mean_mm.toFixed(2)} mm` : "";
  return `  ${r.case}: ${r.status === "done" ? `done, verdict ${r.verdict}${tre}` : r.status}`;
}

export function batchCommand(ctx: CliContext): Command {
  const cmd = new Command("batch")
    .description(
      "Align every case of a manifest (and export training pairs with --pair) into OUT/<case>/, resumable, shardable over cluster array tasks; writes cohort.csv and cohort.html.",
    )
    .argument(
      "[manifest]",
      "manifest CSV (case,fixed,moving[,fixed_landmarks,moving_landmarks,fixed_labels,moving_labels])",
    )
    .option("--out <dir>", "output directory (created if absent)")
    .addOption(
      new Option("--jobs <n>", "cases at a time, each in its own process")
        .argParser(integerIn(1, 256))
        .default(1),
    )
    .option(
      "--shard <K/N|auto>",
      "run only every N-th case starting at the K-th; auto: from the cluster's array-task variables",
    )
    .option("--resume", "skip cases whose done-marker matches the current inputs, settings and outputs")
    .option(
      "--confine",
      "refuse manifest paths that leave the manifest's folder (after .. and symbolic links)",
    )
    .option(
      "--summarize <dir>",
      "rebuild cohort.csv and cohort.html of an output folder from its case folders and exit",
    )
    .option(
      "--pair",
      "also write the training pair (pair.nii.gz, metal.nii.gz, pair.json) into each case folder",
    );
  addPairExportOptions(cmd);
  return cmd
    .addOption(
      new Option("--model <model>", "transform model (default: align's, rigid)").choices([
        "rigid",
        "similarity",
        "affine",
      ]),
    )
    .addOption(
      new Option("--metric <metric>", "similarity metric (default: align's, mi)").choices([
        "mi",
        "nmi",
        "lncc",
      ]),
    )
    .addOption(
      new Option("--levels <mm,...>", "sampling step per pyramid level in mm, coarse to fine").argParser(
        numberList(0.01, 1000),
      ),
    )
    .addOption(
      new Option(
        "--metal-hu <hu>",
        `metal threshold in HU for align and the pair's metal mask (default ${DEFAULT_METAL_HU})`,
      ).argParser(numberIn()),
    )
    .addOption(
      new Option(
        "--metal-margin-mm <mm>",
        "margin excluded around metal by align (default: align's, 5)",
      ).argParser(numberIn(0, 100)),
    )
    .option("--no-metal-mask", "do not exclude metal from the metric")
    .addOption(
      new Option("--fixed-modality <m>", "fixed modality (default: detected)").choices(["ct", "mr", "other"]),
    )
    .addOption(
      new Option("--moving-modality <m>", "moving modality (default: detected)").choices([
        "ct",
        "mr",
        "other",
      ]),
    )
    .addOption(
      new Option("--init <method>", "initialisation (default: align's)").choices([
        "centroid",
        "moments",
        "header",
        "landmarks",
      ]),
    )
    .addOption(new Option("--seed <n>", "random seed (default: align's)").argParser(integerIn(0)))
    .option("--lps", "landmark files hold LPS coordinates")
    .addOption(
      new Option(
        "--threads <n>",
        "threads inside each case (default: 1 with --jobs > 1, else as coxa align chooses)",
      ).argParser(integerIn(1, 256)),
    )
    .option("--json", "print the cohort rows and counts as JSON only")
    .option("--quiet", "no progress bar")
    .addHelpText("after", HELP_AFTER)
    .action(async (manifest: string | undefined, opts: BatchCliOptions) => {
      if (opts.summarize !== undefined) {
        const summary = summarizeBatch({ dir: opts.summarize, manifest });
        ctx.exitCode = summary.exitCode;
        if (opts.json) {
          ctx.io.stdout(`${JSON.stringify({ ...summary, exit_code: summary.exitCode }, null, 2)}\n`);
          return;
        }
        const c = summary.counts;
        ctx.io.stdout(
          `${[
            `summarised ${c.cases} cases: ${c.pass} pass, ${c.review} review, ${c.fail} fail, ${c.failed} not completed`,
            ...summary.rows.filter((r) => r.status !== "done").map(rowLine),
            `  ${summary.files.csv}`,
            `  ${summary.files.html}`,
          ].join("\n")}\n`,
        );
        return;
      }
      if (manifest === undefined)
        throw new CoxaError("BAD_ARGUMENT", "batch needs a MANIFEST (or --summarize DIR)");
      if (opts.out === undefined) throw new CoxaError("BAD_ARGUMENT", "batch needs --out DIR");
      const shard = resolveShard(opts.shard);
      const align: BatchAlignSettings = {
        model: opts.model,
        metric: opts.metric,
        levelsMm: opts.levels,
        metalHu: opts.metalHu,
        metalMarginMm: opts.metalMarginMm,
        metalMask: opts.metalMask === false ? false : undefined,
        fixedModality: opts.fixedModality,
        movingModality: opts.movingModality,
        init: opts.init,
        seed: opts.seed,
        lps: opts.lps ? true : undefined,
      };
      const pair: BatchPairSettings | null = opts.pair
        ? {
            slices: opts.slices ?? false,
            normalize: opts.normalize,
            ctLevelHu: opts.ctLevel,
            ctWidthHu: opts.ctWidth,
            mrPercentiles: [opts.mrPercentiles[0], opts.mrPercentiles[1]],
            metalHu: opts.metalHu,
            minBodyFraction: opts.minBodyFraction,
          }
        : null;
      if (!opts.pair && opts.slices) throw new CoxaError("BAD_ARGUMENT", "--slices needs --pair in a batch");
      const bar = createProgressBar(ctx.io, !opts.quiet && !opts.json);
      let result: BatchResult;
      try {
        result = await runBatch({
          manifest,
          out: opts.out,
          jobs: opts.jobs,
          shard,
          resume: opts.resume,
          confine: opts.confine,
          align,
          pair,
          threads: opts.threads,
          onProgress: bar.update,
        });
      } finally {
        bar.done();
      }
      ctx.exitCode = result.exitCode;
      if (opts.json) {
        ctx.io.stdout(
          `${JSON.stringify(
            {
              rows: result.rows,
              counts: result.counts,
              exit_code: result.exitCode,
              ran: result.ran,
              skipped: result.skipped,
              shard: result.shard,
              files: result.files,
            },
            null,
            2,
          )}\n`,
        );
        return;
      }
      const c = result.counts;
      const shardText = result.shard ? ` (shard ${result.shard.index}/${result.shard.count})` : "";
      ctx.io.stdout(
        `${[
          `batch${shardText}: ${c.cases} cases, ${result.ran.length} ran, ${result.skipped.length} already complete: ${c.pass} pass, ${c.review} review, ${c.fail} fail, ${c.failed} not completed`,
          ...result.rows.map(rowLine),
          `  ${result.files.csv}`,
          `  ${result.files.html}`,
        ].join("\n")}\n`,
      );
    });
}
