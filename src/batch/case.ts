/**
 * One case of a batch: align (and optionally export the training pair) into OUT/<case>/, then
 * write the done-marker last (./marker.ts). Runs in a child process of the batch (./pool.ts) or,
 * for embedding and tests, in the calling process.
 *
 * Order, so that an interruption at any point leaves no marker and the case is redone:
 *  1. delete done.json / failed.json, coxa's temporary files (.coxa-tmp-*) and the outputs an
 *     earlier run of the case wrote (only coxa's own file names);
 *  2. write case.json;
 *  3. align, then the pair export, each writing its files atomically;
 *  4. hash the outputs and write done.json atomically.
 * A case that cannot be completed gets failed.json with a one-line reason instead.
 */
import { existsSync, mkdirSync, readdirSync, rmSync } from "node:fs";
import { join } from "node:path";
import { writeJsonAtomic } from "../common/atomic.js";
import { CoxaError, isCoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { softwareInfo } from "../common/version.js";
import { exportPair, PAIR_FILES, type PairNormalize, SLICES_FOLDER } from "../export/pair.js";
import type { AlignOptions } from "../register/align.js";
import type { InputRole } from "./manifest.js";
import {
  CASE_RECORD,
  DONE_MARKER,
  type DoneMarker,
  FAILED_MARKER,
  type FailedMarker,
  type HashedFile,
  type RunRef,
  recordOutputs,
} from "./marker.js";

/** Files coxa align writes into its output folder (design.md). */
export const ALIGN_FILES = [
  "transform.json",
  "moving-on-fixed.nii.gz",
  "summary.json",
  "report.html",
] as const;

/** Registration settings a batch passes to every case (unset: align's defaults). */
export type BatchAlignSettings = Pick<
  AlignOptions,
  | "model"
  | "metric"
  | "levelsMm"
  | "metalHu"
  | "metalMarginMm"
  | "metalMask"
  | "fixedModality"
  | "movingModality"
  | "init"
  | "seed"
  | "lps"
>;

/** Pair-export settings of a batch run with --pair. */
export interface BatchPairSettings {
  slices?: boolean;
  normalize?: PairNormalize;
  ctLevelHu?: number;
  ctWidthHu?: number;
  mrPercentiles?: [number, number];
  metalHu?: number;
  minBodyFraction?: number;
}

/** What a batch needs back from align. */
export interface CaseAlignResult {
  summary: { verdict: "pass" | "review" | "fail" };
  exitCode: number;
}

/** The registration step (coxa align's library function, or a stand-in in tests). */
export type CaseAlignFn = (options: AlignOptions) => Promise<CaseAlignResult>;

/** Everything a worker needs to run one case (plain data: it crosses a process boundary). */
export interface CaseTask {
  name: string;
  index: number;
  /** OUT/<case>, absolute. */
  dir: string;
  /** Absolute input paths per role. */
  inputs: Partial<Record<InputRole, string>>;
  /** Input hashes taken before the case started (recorded in the marker). */
  inputHashes: Partial<Record<InputRole, HashedFile>>;
  align: BatchAlignSettings;
  /** Pair export settings, or null without --pair. */
  pair: BatchPairSettings | null;
  /** The settings block recorded in the marker and its hash. */
  settings: unknown;
  settingsSha: string;
  /** Threads for align and the export inside this case. */
  threads?: number;
  run: RunRef;
}

/** How a case ended. */
export interface CaseOutcome {
  name: string;
  index: number;
  status: "done" | "failed";
  verdict?: "pass" | "review" | "fail";
  /** One line, for failed cases. */
  reason?: string;
  code?: string;
  seconds: number;
  peakRssMb: number | null;
}

/**
 * Peak resident set size of this process so far, MB.
 */
export function peakRssMb(): number {
  return process.resourceUsage().maxRSS / 1024;
}

/** Remove coxa's own outputs, state files and temporary files from a case folder. */
export function clearCaseFolder(dir: string): void {
  if (!existsSync(dir)) return;
  for (const name of [DONE_MARKER, FAILED_MARKER, CASE_RECORD, ...ALIGN_FILES, ...PAIR_FILES]) {
    rmSync(join(dir, name), { force: true });
  }
  for (const folder of [dir, join(dir, SLICES_FOLDER)]) {
    if (!existsSync(folder)) continue;
    for (const name of readdirSync(folder)) {
      if (name.startsWith(".coxa-tmp-") || (folder !== dir && /^slice-\d+\.npy$/.test(name))) {
        rmSync(join(folder, name), { force: true, recursive: true });
      }
    }
  }
}

/** The output files of a finished case, relative to its folder. */
function outputList(dir: string, pair: BatchPairSettings | null): string[] {
  const files: string[] = [...ALIGN_FILES];
  if (pair) {
    files.push("pair.nii.gz", "metal.nii.gz", "pair.json");
    if (pair.slices) {
      files.push("slices.csv");
      const folder = join(dir, SLICES_FOLDER);
      if (existsSync(folder)) {
        for (const name of readdirSync(folder).sort()) {
          if (/^slice-\d+\.npy$/.test(name)) files.push(`${SLICES_FOLDER}/${name}`);
        }
      }
    }
  }
  return files;
}

/**
 * Write failed.json for a case.
 * @param task - the case
 * @param reason - one line
 * @param code - error code
 * @param seconds - time spent
 */
export function writeFailedMarker(task: CaseTask, reason: string, code: string, seconds: number): void {
  mkdirSync(task.dir, { recursive: true });
  const marker: FailedMarker = {
    format: "coxa.case-failed",
    version: 1,
    case: task.name,
    index: task.index,
    status: "failed",
    reason,
    code,
    seconds,
    finished_at: new Date().toISOString(),
    run: task.run,
    software: softwareInfo(),
  };
  writeJsonAtomic(join(task.dir, FAILED_MARKER), marker);
}

/**
 * Run one case (see the module header). Never throws for a case problem: a bad input or an
 * error inside align becomes a `failed` outcome with failed.json written.
 * @param task - the case
 * @param align - the registration step
 * @param onProgress - progress of align and the export (stage names prefixed "align"/"pair")
 * @returns the outcome
 */
export async function runCase(
  task: CaseTask,
  align: CaseAlignFn,
  onProgress?: ProgressFn,
): Promise<CaseOutcome> {
  const t0 = performance.now();
  const cpu0 = process.cpuUsage();
  const seconds = () => Math.round((performance.now() - t0) / 10) / 100;
  try {
    mkdirSync(task.dir, { recursive: true });
    clearCaseFolder(task.dir);
    writeJsonAtomic(join(task.dir, CASE_RECORD), {
      format: "coxa.case",
      version: 1,
      case: task.name,
      index: task.index,
      inputs: task.inputs,
      settings: task.settings,
      started_at: new Date().toISOString(),
      run: task.run,
    });
    const i = task.inputs;
    if (!i.fixed || !i.moving)
      throw new CoxaError("BAD_MANIFEST", `case ${task.name} has no fixed or moving image`);
    const result = await align({
      ...task.align,
      fixed: i.fixed,
      moving: i.moving,
      out: task.dir,
      fixedLandmarks: i.fixed_landmarks,
      movingLandmarks: i.moving_landmarks,
      fixedLabels: i.fixed_labels,
      movingLabels: i.moving_labels,
      threads: task.threads,
      onProgress: onProgress ? (e) => onProgress({ ...e, stage: `align ${e.stage}` }) : undefined,
    });
    if (task.pair) {
      await exportPair({
        ...task.pair,
        fixed: i.fixed,
        moving: i.moving,
        transform: join(task.dir, "transform.json"),
        out: task.dir,
        caseName: task.name,
        threads: task.threads,
        onProgress: onProgress ? (e) => onProgress({ ...e, stage: `pair ${e.stage}` }) : undefined,
      });
    }
    const outputs = await recordOutputs(task.dir, outputList(task.dir, task.pair));
    const verdict = result.summary.verdict;
    const peak = peakRssMb();
    const marker: DoneMarker = {
      format: "coxa.case-done",
      version: 1,
      case: task.name,
      index: task.index,
      status: "done",
      verdict,
      align_exit_code: result.exitCode,
      inputs: task.inputHashes,
      settings: task.settings,
      settings_sha256: task.settingsSha,
      outputs,
      seconds: seconds(),
      peak_rss_mb: Math.round(peak * 10) / 10,
      cpu_s: cpuSeconds(cpu0),
      finished_at: new Date().toISOString(),
      run: task.run,
      software: softwareInfo(),
    };
    writeJsonAtomic(join(task.dir, DONE_MARKER), marker);
    return {
      name: task.name,
      index: task.index,
      status: "done",
      verdict,
      seconds: marker.seconds,
      peakRssMb: marker.peak_rss_mb,
    };
  } catch (err) {
    const reason = oneLine(
      isCoxaError(err) ? err.message : `internal error: ${(err as Error)?.message ?? String(err)}`,
    );
    const code = isCoxaError(err) ? err.code : "INTERNAL";
    const s = seconds();
    try {
      writeFailedMarker(task, reason, code, s);
    } catch {
      // The folder itself is unusable; the outcome still carries the reason.
    }
    return {
      name: task.name,
      index: task.index,
      status: "failed",
      reason,
      code,
      seconds: s,
      peakRssMb: peakRssMb(),
    };
  }
}

/** CPU seconds (user + system, all threads of this process) since `start`. */
function cpuSeconds(start: NodeJS.CpuUsage): number {
  const d = process.cpuUsage(start);
  return Math.round((d.user + d.system) / 1e4) / 100;
}

/** Collapse a message to one line. */
export function oneLine(text: string): string {
  return text.replace(/\s*[\r\n]+\s*/g, " ").trim();
}
