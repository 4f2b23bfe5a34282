/** `coxa landmarks`: residual error of a stored transform at paired landmarks. */
import { Command, Option } from "commander";
import { checkLandmarks } from "../register/check-landmarks.js";
import { DEFAULT_THRESHOLDS } from "../register/quality.js";
import { numberIn } from "./parse.js";
import type { CliContext } from "./run.js";

export function landmarksCommand(ctx: CliContext): Command {
  return new Command("landmarks")
    .description(
      "Target registration error of a stored transform at paired landmarks (label,x,y,z in RAS mm).",
    )
    .requiredOption("--transform <json>", "transform.json written by coxa align")
    .requiredOption("--fixed-landmarks <csv>", "landmarks in the fixed image")
    .requiredOption("--moving-landmarks <csv>", "the same landmarks in the moving image")
    .option("--lps", "landmark files are in LPS (x and y flipped on input)")
    .addOption(
      new Option(
        "--fle-mm <mm>",
        "assumed landmark localisation error (default: estimated from the FRE)",
      ).argParser(numberIn(0, 100)),
    )
    .addOption(
      new Option("--tre-pass-mm <mm>", "mean TRE that passes")
        .argParser(numberIn(0, 1000))
        .default(DEFAULT_THRESHOLDS.trePassMm),
    )
    .addOption(
      new Option("--tre-review-mm <mm>", "mean TRE above which it fails")
        .argParser(numberIn(0, 1000))
        .default(DEFAULT_THRESHOLDS.treReviewMm),
    )
    .option("--json", "print the result as JSON only")
    .addHelpText(
      "after",
      "\nExit codes: 0 pass or review, 3 fail, 2 bad input.\n\nExample:\n  coxa landmarks --transform out/demo/transform.json \\\n    --fixed-landmarks data-synthetic/landmarks-ct.csv --moving-landmarks data-synthetic/landmarks-mr.csv\n",
    )
    .action(
      (flags: {
        transform: string;
        fixedLandmarks: string;
        movingLandmarks: string;
        lps?: boolean;
        fleMm?: number;
        trePassMm: number;
        treReviewMm: number;
        json?: boolean;
      }) => {
        const r = checkLandmarks(flags);
        if (flags.json) ctx.io.stdout(`${JSON.stringify(r, null, 2)}\n`);
        else {
          const w = Math.max(5, ...r.landmarks.per_point.map((p) => p.label.length));
          const lines = [`${"label".padEnd(w)}  error_mm  predicted_tre_mm`];
          for (const p of r.landmarks.per_point) {
            lines.push(
              `${p.label.padEnd(w)}  ${p.error_mm.toFixed(3).padStart(8)}  ${p.predicted_tre_mm === null ? "       -" : p.predicted_tre_mm.toFixed(3).padStart(16)}`,
            );
          }
          const t = r.landmarks.tre_mm;
          lines.push(
            `mean ${t.mean.toFixed(3)} mm, median ${t.median.toFixed(3)}, max ${t.max.toFixed(3)}, n = ${r.landmarks.count}`,
          );
          if (r.landmarks.fre_mm !== null)
            lines.push(`FRE of the best rigid landmark fit ${r.landmarks.fre_mm.toFixed(3)} mm`);
          lines.push(`verdict: ${r.verdict} — ${r.reason}`);
          ctx.io.stdout(`${lines.join("\n")}\n`);
        }
        ctx.exitCode = r.verdict === "fail" ? 3 : 0;
      },
    );
}
