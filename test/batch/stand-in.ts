/**
 * A stand-in for the registration step in batch orchestration tests: it writes align's four
 * output files with a summary whose verdict and TRE come from the "fixed image" text (tiny text
 * files stand in for images; the manifest only checks that files exist). Text starting with
 * "broken" makes it throw a bad-input error like the NIfTI reader's. Invented data.
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import type { CaseAlignFn } from "../../src/batch/case.js";
import { writeFileAtomic, writeJsonAtomic } from "../../src/common/atomic.js";
import { CoxaError } from "../../src/common/errors.js";

/** Calls made, in order (the fixed image path of each). */
export interface StandIn {
  align: CaseAlignFn;
  calls: string[];
}

/** A fresh stand-in with its own call log. */
export function makeStandIn(): StandIn {
  const calls: string[] = [];
  const align: CaseAlignFn = async (o) => {
    calls.push(o.fixed);
    const text = readFileSync(o.fixed, "utf8");
    if (text.startsWith("broken")) throw new CoxaError("NOT_NIFTI", "not a NIfTI file", o.fixed);
    const verdict = (/verdict=(\w+)/.exec(text)?.[1] ?? "pass") as "pass" | "review" | "fail";
    const tre = Number(/tre=([\d.]+)/.exec(text)?.[1] ?? "1");
    writeJsonAtomic(join(o.out, "transform.json"), { stand_in: true, seed: o.seed ?? null });
    writeFileAtomic(join(o.out, "moving-on-fixed.nii.gz"), `resampled ${text}`);
    writeJsonAtomic(join(o.out, "summary.json"), {
      verdict,
      reasons: [`stand-in verdict ${verdict}`],
      overlap_fraction: 0.875,
      timing_s: { total: 0.5 },
      landmarks: { count: 4, tre_mm: { mean: tre, max: 2 * tre } },
      labels: { dice: { "1": 0.5, "2": 0.75 }, mean_dice: 0.625 },
    });
    writeFileAtomic(join(o.out, "report.html"), "<!DOCTYPE html><title>stand-in</title>");
    return { summary: { verdict }, exitCode: verdict === "fail" ? 3 : 0 };
  };
  return { align, calls };
}
