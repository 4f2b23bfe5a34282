#!/usr/bin/env node
// coxa benchmarks (`npm run bench`, which builds first). Prints one JSON document with a
// section per benchmark. Speed and memory targets live here, never in unit tests.
//
//   node scripts/bench.mjs                 all sections
//   node scripts/bench.mjs --only batch    one section
//
// Sections (registration, hard_cases and capture_range: see scripts/bench-registration.mjs):
//   batch  throughput of `coxa batch` over 8 synthetic demo phantoms (invented data, not
//          patients) with --jobs 1 and --jobs 2 (target: >= 1.7x on 2 cores), and the peak
//          resident memory of each case process (recorded in the done-markers).
//          COXA_BENCH_DATA=DIR keeps the phantoms between runs (generated when absent).
//   stress `coxa stress` on the demo phantom, 5 trials x 5 severities x 2 modes (see
//          scripts/bench-stress.mjs).
import { execFileSync } from "node:child_process";
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { availableParallelism, cpus, loadavg, tmpdir } from "node:os";
import { join } from "node:path";
import { performance } from "node:perf_hooks";
import { fileURLToPath } from "node:url";
import { captureRangeSection, hardCasesSection, registrationSection } from "./bench-registration.mjs";
import { stressSection } from "./bench-stress.mjs";

const ROOT = fileURLToPath(new URL("..", import.meta.url));
const BIN = join(ROOT, "dist", "cli", "main.js");

const onlyAt = process.argv.indexOf("--only");
const only = onlyAt > 0 ? process.argv[onlyAt + 1] : undefined;

function stats(values) {
  if (values.length === 0) return { count: 0, min: null, mean: null, max: null };
  const sum = values.reduce((a, b) => a + b, 0);
  return {
    count: values.length,
    min: Math.min(...values),
    mean: sum / values.length,
    max: Math.max(...values),
  };
}

const round = (v, d = 3) => (v === null ? null : Math.round(v * 10 ** d) / 10 ** d);

async function batchSection() {
  const CASES = 8;
  const dataDir = process.env.COXA_BENCH_DATA ?? mkdtempSync(join(tmpdir(), "coxa-bench-data-"));
  const keepData = process.env.COXA_BENCH_DATA !== undefined;
  const work = mkdtempSync(join(tmpdir(), "coxa-bench-batch-"));
  try {
    const rows = ["case,fixed,moving,fixed_landmarks,moving_landmarks"];
    const t0 = performance.now();
    for (let n = 1; n <= CASES; n++) {
      const dir = join(dataDir, `case${n}`);
      if (!existsSync(join(dir, "truth.json"))) {
        mkdirSync(dir, { recursive: true });
        execFileSync(process.execPath, [
          BIN,
          "phantom",
          "--out",
          dir,
          "--seed",
          String(100 + n),
          "--size",
          "demo",
          "--quiet",
          "--force",
        ]);
      }
      rows.push(
        `case${n},case${n}/ct.nii.gz,case${n}/mr.nii.gz,case${n}/landmarks-ct.csv,case${n}/landmarks-mr.csv`,
      );
    }
    const phantomSeconds = (performance.now() - t0) / 1000;
    const manifest = join(dataDir, "manifest.csv");
    writeFileSync(manifest, `${rows.join("\n")}\n`);
    const runs = {};
    // jobs_1: one case at a time with all cores (the default); jobs_1_threads_1: one case at a
    // time on one thread each, like jobs_2's cases, so the pool's own scaling is seen.
    for (const [name, jobs, extra] of [
      ["jobs_1", 1, []],
      ["jobs_1_threads_1", 1, ["--threads", "1"]],
      ["jobs_2", 2, []],
    ]) {
      const out = join(work, name);
      const start = performance.now();
      let text;
      try {
        text = execFileSync(
          process.execPath,
          [BIN, "batch", manifest, "--out", out, "--jobs", String(jobs), ...extra, "--quiet", "--json"],
          {
            encoding: "utf8",
            maxBuffer: 1 << 26,
          },
        );
      } catch (err) {
        if (err.status !== 3) throw err; // 3: some verdict fail; the timing still counts
        text = err.stdout;
      }
      const seconds = (performance.now() - start) / 1000;
      const result = JSON.parse(text);
      const peaks = [];
      const caseSeconds = [];
      const caseCpu = [];
      for (let n = 1; n <= CASES; n++) {
        const marker = JSON.parse(readFileSync(join(out, `case${n}`, "done.json"), "utf8"));
        if (marker.peak_rss_mb !== null) peaks.push(marker.peak_rss_mb);
        caseSeconds.push(marker.seconds);
        caseCpu.push(marker.cpu_s);
      }
      runs[name] = {
        wall_s: round(seconds, 2),
        cases_per_minute: round((60 * CASES) / seconds, 2),
        case_seconds: Object.fromEntries(
          Object.entries(stats(caseSeconds)).map(([k, v]) => [k, round(v, 2)]),
        ),
        case_cpu_seconds: Object.fromEntries(
          Object.entries(stats(caseCpu)).map(([k, v]) => [k, round(v, 2)]),
        ),
        peak_rss_mb_per_worker: Object.fromEntries(
          Object.entries(stats(peaks)).map(([k, v]) => [k, round(v, 1)]),
        ),
        machine_load_after: round(loadavg()[0], 2),
        verdicts: result.counts,
      };
    }
    const speedup = runs.jobs_1.wall_s / runs.jobs_2.wall_s;
    const poolSpeedup = runs.jobs_1_threads_1.wall_s / runs.jobs_2.wall_s;
    return {
      cases: CASES,
      data: "coxa phantom --size demo, seeds 101-108 (synthetic, CT 160x160x96, MR 128x128x36)",
      phantom_generation_s: round(phantomSeconds, 1),
      ...runs,
      speedup_jobs2_over_jobs1: round(speedup, 3),
      speedup_jobs2_over_jobs1_one_thread_per_case: round(poolSpeedup, 3),
      target_speedup: 1.7,
      meets_target: speedup >= 1.7,
      note: "--jobs 1 gives each case all cores (threads default), --jobs 2 one thread per case; wall times on a shared machine are noisy (machine_load_after: 1-minute load average when the run ended; above the core count other work competed)",
    };
  } finally {
    rmSync(work, { recursive: true, force: true });
    if (!keepData) rmSync(dataDir, { recursive: true, force: true });
  }
}

const SECTIONS = {
  registration: registrationSection,
  hard_cases: hardCasesSection,
  capture_range: captureRangeSection,
  batch: batchSection,
  stress: stressSection,
};

if (!existsSync(BIN)) {
  console.error('bench: dist/ is missing; run "npm run build" (npm run bench does)');
  process.exit(1);
}
if (only !== undefined && !(only in SECTIONS)) {
  console.error(`bench: unknown section "${only}" (known: ${Object.keys(SECTIONS).join(", ")})`);
  process.exit(2);
}
const report = {
  machine: {
    cpus: availableParallelism(),
    model: cpus()[0]?.model ?? "unknown",
    node: process.version,
    load_at_start: loadavg()[0],
  },
  started_at: new Date().toISOString(),
};
for (const [name, run] of Object.entries(SECTIONS)) {
  if (only !== undefined && name !== only) continue;
  report[name] = await run();
}
console.log(JSON.stringify(report, null, 2));
