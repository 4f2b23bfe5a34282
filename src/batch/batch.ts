/**
 * `coxa batch`: align (and optionally export) every case of a manifest into OUT/<case>/, with
 * a pool of case processes (./pool.ts), resumable through done-markers (./marker.ts), split
 * into shards for cluster array jobs (./shard.ts), and summarised into cohort.csv /
 * cohort.html (./cohort.ts).
 *
 * Order of a run:
 *  1. the manifest is validated completely (./manifest.ts) and the outputs are checked not to
 *     land on an input: any problem throws before anything is written;
 *  2. the shard's cases are selected; the inputs of each are hashed (SHA-256); with `resume`,
 *     a case whose done-marker matches the inputs, the settings and its outputs is skipped;
 *  3. the remaining cases run, `jobs` at a time; a case that fails is recorded (failed.json)
 *     and the others go on;
 *  4. a run record is written to OUT/batch-runs/<run id>.json (which cases this run ran or
 *     skipped), then the cohort files: cohort.csv / cohort.html for a run over all cases, or
 *     cohort-shard-K-of-N.csv / .html for a shard (two shards never write the same file;
 *     `summarizeBatch` merges everything on disk into cohort.csv / cohort.html).
 *
 * Exit code (batchExitCode): 0 when every case of the run is done with verdict pass or review;
 * 3 when any has verdict fail or could not be completed (bad input, crash) — the batch itself
 * ran, but not every result is usable; the reasons are in cohort.csv. Manifest problems throw
 * (exit 2) before anything runs.
 */
import { existsSync, mkdirSync, readdirSync, realpathSync, rmSync, statSync } from "node:fs";
import { hostname } from "node:os";
import { basename, dirname, join, resolve } from "node:path";
import { writeJsonAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { softwareInfo } from "../common/version.js";
import { PAIR_FILES, SLICES_FOLDER } from "../export/pair.js";
import { alignPair } from "../register/align.js";
import {
  ALIGN_FILES,
  type BatchAlignSettings,
  type BatchPairSettings,
  type CaseAlignFn,
  type CaseOutcome,
  type CaseTask,
  runCase,
  writeFailedMarker,
} from "./case.js";
import {
  type CohortCounts,
  type CohortRow,
  type CohortSummary,
  findCaseFolders,
  writeCohort,
} from "./cohort.js";
import { type Manifest, readManifest } from "./manifest.js";
import {
  CASE_RECORD,
  checkComplete,
  DONE_MARKER,
  FAILED_MARKER,
  hashInputs,
  type RunRef,
  settingsHash,
} from "./marker.js";
import { runInProcesses } from "./pool.js";
import { type Shard, selectShard, shardTag } from "./shard.js";

/** Options of runBatch (the CLI's flags, camelCase). */
export interface BatchOptions {
  /** Manifest CSV. */
  manifest: string;
  /** Output folder (created if absent). */
  out: string;
  /** Cases at a time; default 1. */
  jobs?: number;
  /** Only this shard's cases; default all. */
  shard?: Shard;
  /** Skip cases that are complete for the current inputs and settings. */
  resume?: boolean;
  /** Refuse manifest paths outside the manifest's folder. */
  confine?: boolean;
  /** Registration settings for every case (unset: align's defaults). */
  align?: BatchAlignSettings;
  /** Also export the training pair into each case folder (null/undefined: no export). */
  pair?: BatchPairSettings | null;
  /** Threads inside each case; default 1 when jobs > 1, else the machine's parallelism. */
  threads?: number;
  /** How --resume checks existing outputs: full SHA-256 (default) or sizes only. */
  verifyOutputs?: "sha256" | "size";
  /** "process" (default): a child process per case; "inline": in this process (embedding, tests). */
  isolation?: "process" | "inline";
  /** The registration step for inline runs; default coxa align's library function. */
  alignImpl?: CaseAlignFn;
  /** Environment recorded in the run (host name); default os.hostname(). */
  host?: string;
  onProgress?: ProgressFn;
}

/** What runBatch returns. */
export interface BatchResult {
  /** Rows of this run's cases (as written to the cohort file). */
  rows: CohortRow[];
  counts: CohortCounts;
  exitCode: 0 | 3;
  /** Cases run by this run, and cases skipped as complete. */
  ran: string[];
  skipped: string[];
  outcomes: CaseOutcome[];
  shard: Shard | null;
  files: { csv: string; html: string; runRecord: string };
}

/** Folder of the run records inside OUT. */
export const RUNS_FOLDER = "batch-runs";

function checkBatchOptions(o: BatchOptions): void {
  if (typeof o.manifest !== "string" || o.manifest === "")
    throw new CoxaError("BAD_ARGUMENT", "batch needs a manifest");
  if (typeof o.out !== "string" || o.out === "")
    throw new CoxaError("BAD_ARGUMENT", "batch needs an output folder");
  const jobs = o.jobs ?? 1;
  if (!Number.isInteger(jobs) || jobs < 1)
    throw new CoxaError("BAD_ARGUMENT", `jobs ${jobs} is not a whole number >= 1`);
  if (o.threads !== undefined && (!Number.isInteger(o.threads) || o.threads < 1)) {
    throw new CoxaError("BAD_ARGUMENT", `threads ${o.threads} is not a whole number >= 1`);
  }
  if (o.shard && !(Number.isInteger(o.shard.index) && o.shard.index >= 1 && o.shard.index <= o.shard.count)) {
    throw new CoxaError("BAD_ARGUMENT", `shard ${o.shard.index}/${o.shard.count} needs 1 <= K <= N`);
  }
}

function realOrResolved(path: string): string {
  try {
    return realpathSync(path);
  } catch {
    return resolve(path);
  }
}

/** Refuse a run whose case outputs would replace or delete an input file. */
function checkOutputsAvoidInputs(manifest: Manifest, out: string): void {
  const inputs = new Map<string, string>();
  for (const c of manifest.cases)
    for (const p of Object.values(c.inputs)) if (p) inputs.set(realOrResolved(p), c.name);
  const owned = [CASE_RECORD, DONE_MARKER, FAILED_MARKER, ...ALIGN_FILES, ...PAIR_FILES];
  for (const c of manifest.cases) {
    const dir = join(out, c.name);
    for (const name of owned) {
      const hit = inputs.get(realOrResolved(join(dir, name)));
      if (hit !== undefined) {
        throw new CoxaError(
          "WOULD_OVERWRITE",
          `an input of case "${hit}" sits where case "${c.name}" writes ${name}; choose another --out`,
          join(dir, name),
        );
      }
    }
    for (const p of Object.values(c.inputs)) {
      if (
        p &&
        dirname(realOrResolved(p)) === realOrResolved(join(dir, SLICES_FOLDER)) &&
        /^slice-\d+\.npy$/.test(basename(p))
      ) {
        throw new CoxaError("WOULD_OVERWRITE", `an input lies in the slices folder of case "${c.name}"`, p);
      }
    }
  }
}

/** Run-record temporaries older than this are left over from a killed run (a write takes milliseconds). */
const STALE_TEMPORARY_MS = 10 * 60 * 1000;

/**
 * Remove temporary files a killed run left in OUT: those of this run's cohort files (no other
 * run writes that stem), and stale ones in batch-runs/ (another shard may be writing its record
 * right now, so only old ones go).
 */
function cleanRunTemporaries(out: string, stem: string): void {
  if (!existsSync(out)) return;
  for (const name of readdirSync(out)) {
    if (name.startsWith(".coxa-tmp-") && (name.endsWith(`-${stem}.csv`) || name.endsWith(`-${stem}.html`))) {
      rmSync(join(out, name), { force: true });
    }
  }
  const runs = join(out, RUNS_FOLDER);
  if (!existsSync(runs)) return;
  const now = Date.now();
  for (const name of readdirSync(runs)) {
    const path = join(runs, name);
    if (name.startsWith(".coxa-tmp-") && now - statSync(path).mtimeMs > STALE_TEMPORARY_MS)
      rmSync(path, { force: true });
  }
}

function compact<T extends object>(value: T | undefined | null): Partial<T> | null {
  if (!value) return null;
  const out: Partial<T> = {};
  for (const [k, v] of Object.entries(value)) if (v !== undefined) (out as Record<string, unknown>)[k] = v;
  return out;
}

/**
 * Run a batch (see the module header).
 * @param options - manifest, output folder, jobs, shard, resume, settings
 * @returns rows, counts, exit code and what ran
 * @throws CoxaError (exit 2) BAD_MANIFEST for any manifest problem, BAD_ARGUMENT for bad option
 *   values or an output path that is a file, WOULD_OVERWRITE when outputs would land on
 *   inputs; INTERNAL (exit 1) when the compiled case script is missing
 */
export async function runBatch(options: BatchOptions): Promise<BatchResult> {
  checkBatchOptions(options);
  const manifest = readManifest(options.manifest, { confine: options.confine });
  const out = resolve(options.out);
  if (existsSync(out) && !statSync(out).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "output path exists and is not a directory", options.out);
  }
  checkOutputsAvoidInputs(manifest, out);
  const jobs = options.jobs ?? 1;
  const shard = options.shard ?? null;
  const selected = selectShard(manifest.cases, shard ?? undefined);
  const stem = shard && shard.count > 1 ? `cohort-${shardTag(shard)}` : "cohort";
  const progress = options.onProgress;
  const host = options.host ?? hostname();
  const startedAt = new Date();
  const run: RunRef = {
    run_id: `${startedAt.toISOString().replace(/[-:.]/g, "")}-${host}-${process.pid}`,
    host,
    pid: process.pid,
    shard: shard ? `${shard.index}/${shard.count}` : null,
  };
  const align = compact(options.align) ?? {};
  const pair = compact(options.pair);
  const settings = { align, pair };
  const settingsSha = settingsHash(settings);
  const threads = options.threads ?? (jobs > 1 ? 1 : undefined);

  // Hash inputs and decide what runs.
  const tasks: CaseTask[] = [];
  const skipped: string[] = [];
  for (let s = 0; s < selected.length; s++) {
    const c = selected[s];
    progress?.({ stage: "check inputs", fraction: s / Math.max(1, selected.length), message: c.name });
    const inputHashes = await hashInputs(c.inputs);
    const dir = join(out, c.name);
    if (options.resume) {
      const check = await checkComplete(dir, inputHashes, settingsSha, options.verifyOutputs ?? "sha256");
      if (check.complete) {
        skipped.push(c.name);
        continue;
      }
    }
    tasks.push({
      name: c.name,
      index: c.index,
      dir,
      inputs: c.inputs,
      inputHashes,
      align: align as BatchAlignSettings,
      pair: pair as BatchPairSettings | null,
      settings,
      settingsSha,
      threads,
      run,
    });
  }
  progress?.({ stage: "check inputs", fraction: 1 });
  mkdirSync(out, { recursive: true });
  cleanRunTemporaries(out, stem);

  // Run.
  let finished = 0;
  const running = new Map<string, string>();
  const report = () =>
    progress?.({
      stage: "cases",
      fraction: tasks.length > 0 ? finished / tasks.length : 1,
      message: `${finished}/${tasks.length} cases${skipped.length > 0 ? `, ${skipped.length} already complete` : ""}${
        running.size > 0 ? `; ${[...running].map(([n, st]) => `${n}: ${st}`).join(", ")}` : ""
      }`,
    });
  const onStart = (t: CaseTask) => {
    running.set(t.name, "starting");
    report();
  };
  const onCaseProgress = (name: string, stage: string) => {
    if (!running.has(name)) return;
    running.set(name, stage);
    report();
  };
  const onOutcome = (o: CaseOutcome) => {
    running.delete(o.name);
    finished++;
    report();
  };
  report();
  let outcomes: CaseOutcome[];
  if ((options.isolation ?? "process") === "inline") {
    const alignFn = options.alignImpl ?? alignPair;
    outcomes = new Array(tasks.length);
    let next = 0;
    const lane = async () => {
      while (next < tasks.length) {
        const at = next++;
        onStart(tasks[at]);
        outcomes[at] = await runCase(tasks[at], alignFn, (e) => onCaseProgress(tasks[at].name, e.stage));
        onOutcome(outcomes[at]);
      }
    };
    await Promise.all(Array.from({ length: Math.min(jobs, tasks.length) }, lane));
  } else {
    outcomes = await runInProcesses(tasks, {
      jobs,
      onStart,
      onCaseProgress: (name, e) => onCaseProgress(name, e.stage),
      onOutcome,
      onCrash: (task, reason) => {
        try {
          writeFailedMarker(task, reason, "CRASHED", 0);
        } catch {
          // Recorded in the outcome; the folder may be unusable.
        }
      },
    });
  }

  // Record the run, then the cohort files.
  const runRecord = join(out, RUNS_FOLDER, `${run.run_id}.json`);
  mkdirSync(dirname(runRecord), { recursive: true });
  const byName = new Map(outcomes.map((o) => [o.name, o]));
  writeJsonAtomic(runRecord, {
    format: "coxa.batch-run",
    version: 1,
    run,
    manifest: resolve(manifest.path),
    resume: Boolean(options.resume),
    jobs,
    started_at: startedAt.toISOString(),
    finished_at: new Date().toISOString(),
    settings,
    settings_sha256: settingsSha,
    cases: selected.map((c) => {
      const o = byName.get(c.name);
      return o
        ? {
            case: c.name,
            index: c.index,
            action: "ran",
            status: o.status,
            verdict: o.verdict ?? null,
            reason: o.reason ?? null,
            seconds: o.seconds,
            peak_rss_mb: o.peakRssMb,
          }
        : { case: c.name, index: c.index, action: "skipped (complete)" };
    }),
    software: softwareInfo(),
  });
  const summary: CohortSummary = writeCohort(out, {
    cases: selected.map((c) => ({ name: c.name, index: c.index })),
    stem,
  });
  return {
    rows: summary.rows,
    counts: summary.counts,
    exitCode: summary.exitCode,
    ran: tasks.map((t) => t.name),
    skipped,
    outcomes,
    shard,
    files: { csv: summary.files.csv, html: summary.files.html, runRecord },
  };
}

/** Options of summarizeBatch. */
export interface SummarizeOptions {
  /** The batch output folder. */
  dir: string;
  /** When given, report exactly the manifest's cases in its order (missing ones as "failed: not run"). */
  manifest?: string;
}

/**
 * Rebuild cohort.csv and cohort.html from the case folders on disk (merging shards).
 * @param options - output folder and optional manifest
 * @returns rows, counts, exit code (as a batch) and the files written
 * @throws CoxaError BAD_ARGUMENT when the folder does not exist or holds no case; BAD_MANIFEST
 *   for a bad manifest
 */
export function summarizeBatch(options: SummarizeOptions): CohortSummary {
  const dir = resolve(options.dir);
  if (!existsSync(dir) || !statSync(dir).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "batch output folder does not exist", options.dir);
  }
  const manifest = options.manifest ? readManifest(options.manifest, { checkFiles: false }) : undefined;
  if (!manifest && findCaseFolders(dir).length === 0) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      "holds no case folders (case.json, done.json or failed.json) to summarise",
      options.dir,
    );
  }
  cleanRunTemporaries(dir, "cohort");
  return writeCohort(dir, { cases: manifest?.cases.map((c) => ({ name: c.name, index: c.index })) });
}
