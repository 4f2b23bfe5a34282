/**
 * runBatch / summarizeBatch orchestration, in-process ("inline") with a stand-in registration
 * step (test/batch/stand-in.ts), plus the case-process pool with small scripts that crash or
 * answer on purpose. The real registration runs in the system suite (batch.system.test.ts).
 */
import { existsSync, mkdirSync, readdirSync, readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { describe, expect, it } from "vitest";
import { runBatch, summarizeBatch } from "../../src/batch/batch.js";
import type { CaseTask } from "../../src/batch/case.js";
import { checkComplete, type DoneMarker, hashInputs, settingsHash } from "../../src/batch/marker.js";
import { runInProcesses } from "../../src/batch/pool.js";
import { parseCsv } from "../../src/common/csv.js";
import { writeSyntheticPair } from "../export/pair-fixture.js";
import { tempDir } from "../helpers/tmp.js";
import { makeStandIn } from "./stand-in.js";

const root = tempDir("coxa-batch-");

/** A site folder with four cases: a, b (verdict review, tre 3), c (unreadable), d (verdict fail). */
function makeSite(name: string): { manifest: string; dir: string } {
  const dir = join(root, name);
  const spec: Record<string, string> = {
    a: "tre=0.5",
    b: "verdict=review tre=3",
    c: "broken",
    d: "verdict=fail tre=6",
  };
  for (const [c, text] of Object.entries(spec)) {
    mkdirSync(join(dir, c), { recursive: true });
    writeFileSync(join(dir, c, "ct.txt"), text);
    writeFileSync(join(dir, c, "mr.txt"), `mr of ${c}`);
  }
  const manifest = join(dir, "manifest.csv");
  writeFileSync(
    manifest,
    `case,fixed,moving\n${Object.keys(spec)
      .map((c) => `${c},${c}/ct.txt,${c}/mr.txt`)
      .join("\n")}\n`,
  );
  return { manifest, dir };
}

function csvRows(path: string): Record<string, string>[] {
  const [head, ...rows] = parseCsv(readFileSync(path, "utf8")).map((r) => r.fields);
  return rows.map((r) => Object.fromEntries(head.map((h, i) => [h, r[i]])));
}

describe("runBatch (inline, stand-in registration)", () => {
  it("runs every case, records a failing one and goes on; cohort.csv, cohort.html, markers and exit code 3", async () => {
    const site = makeSite("s1");
    const out = join(root, "s1-out");
    const s = makeStandIn();
    const r = await runBatch({
      manifest: site.manifest,
      out,
      jobs: 2,
      isolation: "inline",
      alignImpl: s.align,
    });
    expect(r.ran).toEqual(["a", "b", "c", "d"]);
    expect(r.exitCode).toBe(3);
    expect(r.counts).toEqual({ cases: 4, done: 3, failed: 1, pass: 1, review: 1, fail: 1 });
    const rows = csvRows(join(out, "cohort.csv"));
    expect(Object.keys(rows[0])).toEqual([
      "case",
      "status",
      "verdict",
      "tre_mean_mm",
      "tre_max_mm",
      "overlap_fraction",
      "seconds",
      "dice_mean",
      "report",
    ]);
    expect(
      rows.map((x) => [
        x.case,
        x.status,
        x.verdict,
        x.tre_mean_mm,
        x.tre_max_mm,
        x.overlap_fraction,
        x.dice_mean,
      ]),
    ).toEqual([
      ["a", "done", "pass", "0.5", "1", "0.875", "0.625"],
      ["b", "done", "review", "3", "6", "0.875", "0.625"],
      ["c", `failed: ${join(site.dir, "c", "ct.txt")}: not a NIfTI file`, "", "", "", "", ""],
      ["d", "done", "fail", "6", "12", "0.875", "0.625"],
    ]);
    expect(rows[0].report).toBe("a/report.html");
    expect(Number(rows[0].seconds)).toBeGreaterThanOrEqual(0);
    const page = readFileSync(join(out, "cohort.html"), "utf8");
    expect(page).toContain('href="a/report.html"');
    expect(page).toContain("Cohort: FAIL");
    expect(page).toMatch(/4 cases: 1 pass, 1 review, 1 fail, 1 not completed/);
    expect(page).toContain("<svg"); // TRE histogram
    const done = JSON.parse(readFileSync(join(out, "a", "done.json"), "utf8")) as DoneMarker;
    expect(done.outputs.map((o) => o.file)).toEqual([
      "transform.json",
      "moving-on-fixed.nii.gz",
      "summary.json",
      "report.html",
    ]);
    expect(done.inputs.fixed?.sha256).toBe(
      (await hashInputs({ fixed: join(site.dir, "a", "ct.txt") })).fixed?.sha256,
    );
    expect(existsSync(join(out, "c", "done.json"))).toBe(false);
    const failed = JSON.parse(readFileSync(join(out, "c", "failed.json"), "utf8"));
    expect(failed).toMatchObject({ status: "failed", code: "NOT_NIFTI" });
    const runs = readdirSync(join(out, "batch-runs"));
    expect(runs).toHaveLength(1);
    const record = JSON.parse(readFileSync(join(out, "batch-runs", runs[0]), "utf8"));
    expect(record.cases.map((c: { action: string }) => c.action)).toEqual(["ran", "ran", "ran", "ran"]);
  });

  it("--resume skips complete cases, redoes failed ones, changed inputs, changed outputs and changed settings", async () => {
    const site = makeSite("s2");
    const out = join(root, "s2-out");
    await runBatch({ manifest: site.manifest, out, isolation: "inline", alignImpl: makeStandIn().align });
    const again = makeStandIn();
    const r = await runBatch({
      manifest: site.manifest,
      out,
      resume: true,
      isolation: "inline",
      alignImpl: again.align,
    });
    expect(r.skipped).toEqual(["a", "b", "d"]);
    expect(r.ran).toEqual(["c"]);
    expect(again.calls).toEqual([join(site.dir, "c", "ct.txt")]);
    expect(r.rows.map((x) => x.status.slice(0, 6))).toEqual(["done", "done", "failed", "done"]);

    writeFileSync(join(site.dir, "b", "mr.txt"), "mr of b, rescanned"); // input changed
    writeFileSync(join(out, "d", "report.html"), "<!DOCTYPE html><title>stand-iN</title>"); // output changed, same size
    writeFileSync(join(site.dir, "c", "ct.txt"), "tre=1"); // the broken input fixed
    const third = makeStandIn();
    const r3 = await runBatch({
      manifest: site.manifest,
      out,
      resume: true,
      isolation: "inline",
      alignImpl: third.align,
    });
    expect(r3.ran).toEqual(["b", "c", "d"]);
    expect(r3.skipped).toEqual(["a"]);
    expect(r3.exitCode).toBe(3); // d still has verdict fail
    expect(existsSync(join(out, "c", "failed.json"))).toBe(false);
    expect(csvRows(join(out, "cohort.csv")).map((x) => x.status)).toEqual(["done", "done", "done", "done"]);

    const fourth = makeStandIn();
    const r4 = await runBatch({
      manifest: site.manifest,
      out,
      resume: true,
      align: { seed: 9 },
      isolation: "inline",
      alignImpl: fourth.align,
    });
    expect(r4.ran).toEqual(["a", "b", "c", "d"]); // settings changed: everything is redone
    const done = JSON.parse(readFileSync(join(out, "a", "done.json"), "utf8")) as DoneMarker;
    expect(done.settings).toEqual({ align: { seed: 9 }, pair: null });
    expect(done.settings_sha256).toBe(settingsHash({ align: { seed: 9 }, pair: null }));
  });

  it("a case interrupted mid-way (no done-marker, stray temporary files) reads as incomplete and is redone", async () => {
    const site = makeSite("s3");
    const out = join(root, "s3-out");
    await runBatch({ manifest: site.manifest, out, isolation: "inline", alignImpl: makeStandIn().align });
    // Simulate a kill after transform.json: the marker gone, a half-written temporary left behind.
    const { rmSync } = await import("node:fs");
    rmSync(join(out, "a", "done.json"));
    writeFileSync(join(out, "a", ".coxa-tmp-0123456789ab-summary.json"), '{"verd');
    writeFileSync(join(out, ".coxa-tmp-0123456789ab-cohort.csv"), "case,sta");
    const summary = summarizeBatch({ dir: out });
    expect(summary.rows[0].status).toBe("failed: incomplete (no done-marker; rerun with --resume)");
    expect(existsSync(join(out, ".coxa-tmp-0123456789ab-cohort.csv"))).toBe(false);
    const s = makeStandIn();
    const r = await runBatch({
      manifest: site.manifest,
      out,
      resume: true,
      isolation: "inline",
      alignImpl: s.align,
    });
    expect(r.ran).toEqual(["a", "c"]);
    expect(readdirSync(join(out, "a")).filter((n) => n.startsWith(".coxa-tmp-"))).toEqual([]);
    expect(r.rows[0].status).toBe("done");
  });

  it("shards 1/2 and 2/2 together cover every case exactly once; --summarize merges them", async () => {
    const site = makeSite("s4");
    const out = join(root, "s4-out");
    const s = makeStandIn();
    const r1 = await runBatch({
      manifest: site.manifest,
      out,
      shard: { index: 1, count: 2 },
      isolation: "inline",
      alignImpl: s.align,
    });
    const r2 = await runBatch({
      manifest: site.manifest,
      out,
      shard: { index: 2, count: 2 },
      isolation: "inline",
      alignImpl: s.align,
    });
    expect(r1.ran).toEqual(["a", "c"]);
    expect(r2.ran).toEqual(["b", "d"]);
    expect(s.calls).toHaveLength(4);
    expect(new Set(s.calls).size).toBe(4);
    expect(existsSync(join(out, "cohort-shard-1-of-2.csv"))).toBe(true);
    expect(csvRows(join(out, "cohort-shard-2-of-2.csv")).map((x) => x.case)).toEqual(["b", "d"]);
    expect(existsSync(join(out, "cohort.csv"))).toBe(false);
    const merged = summarizeBatch({ dir: out });
    expect(merged.rows.map((x) => x.case)).toEqual(["a", "b", "c", "d"]);
    expect(csvRows(join(out, "cohort.csv")).map((x) => x.case)).toEqual(["a", "b", "c", "d"]);
    expect(merged.exitCode).toBe(3);
    // With the manifest, a case that never ran shows as such.
    writeFileSync(site.manifest, `${readFileSync(site.manifest, "utf8")}e,a/ct.txt,a/mr.txt\n`);
    const withManifest = summarizeBatch({ dir: out, manifest: site.manifest });
    expect(withManifest.rows.map((x) => x.status).at(-1)).toBe("failed: not run");
  });

  it("the pair export joins the outputs (with slices) that the done-marker lists and resume verifies", async () => {
    const pair = await writeSyntheticPair(join(root, "px", "c1"));
    const manifest = join(root, "px", "manifest.csv");
    writeFileSync(manifest, "case,fixed,moving\nc1,c1/ct.nii.gz,c1/mr.nii.gz\n");
    const out = join(root, "px-out");
    // Stand-in registration that finds the known transform exactly.
    const align = async (o: { out: string }) => {
      writeFileSync(join(o.out, "transform.json"), readFileSync(pair.transformPath));
      for (const f of ["moving-on-fixed.nii.gz", "report.html"]) writeFileSync(join(o.out, f), "x");
      writeFileSync(join(o.out, "summary.json"), '{"verdict":"pass","overlap_fraction":1}');
      return { summary: { verdict: "pass" as const }, exitCode: 0 };
    };
    const r = await runBatch({
      manifest,
      out,
      pair: { slices: true },
      threads: 1,
      isolation: "inline",
      alignImpl: align,
    });
    expect(r.exitCode).toBe(0);
    const done = JSON.parse(readFileSync(join(out, "c1", "done.json"), "utf8")) as DoneMarker;
    const files = done.outputs.map((o) => o.file);
    expect(files.slice(0, 8)).toEqual([
      "transform.json",
      "moving-on-fixed.nii.gz",
      "summary.json",
      "report.html",
      "pair.nii.gz",
      "metal.nii.gz",
      "pair.json",
      "slices.csv",
    ]);
    expect(files.filter((f) => f.startsWith("slices/"))).toHaveLength(6);
    const inputs = await hashInputs({ fixed: pair.ctPath, moving: pair.mrPath });
    expect((await checkComplete(join(out, "c1"), inputs, done.settings_sha256)).complete).toBe(true);
    expect(JSON.parse(readFileSync(join(out, "c1", "pair.json"), "utf8")).case).toBe("c1");
  });

  it("bad manifests and outputs over inputs throw before anything is written", async () => {
    const site = makeSite("s5");
    const out = join(root, "s5-out");
    writeFileSync(join(site.dir, "bad.csv"), "case,fixed,moving\na,a/ct.txt,a/none.txt\n");
    await expect(
      runBatch({
        manifest: join(site.dir, "bad.csv"),
        out,
        isolation: "inline",
        alignImpl: makeStandIn().align,
      }),
    ).rejects.toMatchObject({
      code: "BAD_MANIFEST",
    });
    expect(existsSync(out)).toBe(false);
    // An input named like an output inside its case's output folder.
    mkdirSync(join(out, "a"), { recursive: true });
    writeFileSync(join(out, "a", "summary.json"), "{}");
    writeFileSync(
      join(site.dir, "clash.csv"),
      `case,fixed,moving\na,${join(out, "a", "summary.json")},a/mr.txt\n`,
    );
    const s = makeStandIn();
    await expect(
      runBatch({ manifest: join(site.dir, "clash.csv"), out, isolation: "inline", alignImpl: s.align }),
    ).rejects.toMatchObject({
      code: "WOULD_OVERWRITE",
    });
    expect(s.calls).toEqual([]);
    expect(readdirSync(out)).toEqual(["a"]);
    await expect(
      runBatch({ manifest: site.manifest, out, jobs: 0, isolation: "inline" }),
    ).rejects.toMatchObject({ code: "BAD_ARGUMENT" });
  });
});

describe("runInProcesses (case-process pool)", () => {
  it("a case process that dies is recorded as crashed with its signal; the others complete", async () => {
    const dir = join(root, "pool");
    mkdirSync(dir, { recursive: true });
    const script = join(dir, "fake-case.mjs");
    // Answers like dist/batch/case-process.js, but kills itself for the case named "boom".
    writeFileSync(
      script,
      `process.once("message", (m) => {
  const t = m.task;
  if (t.name === "boom") process.kill(process.pid, "SIGKILL");
  if (t.name === "exit") process.exit(7);
  process.send({ type: "progress", name: t.name, event: { stage: "work", fraction: 0.5 } });
  process.send({ type: "result", outcome: { name: t.name, index: t.index, status: "done", verdict: "pass", seconds: 0, peakRssMb: process.resourceUsage().maxRSS / 1024 } }, () => process.exit(0));
});\n`,
    );
    const task = (name: string, index: number): CaseTask => ({
      name,
      index,
      dir: join(dir, name),
      inputs: {},
      inputHashes: {},
      align: {},
      pair: null,
      settings: {},
      settingsSha: "x",
      run: { run_id: "r", host: "h", pid: 1, shard: null },
    });
    const crashes: string[] = [];
    const progress: string[] = [];
    const outcomes = await runInProcesses([task("a", 0), task("boom", 1), task("b", 2), task("exit", 3)], {
      jobs: 2,
      script: pathToFileURL(script),
      onCrash: (t, reason) => crashes.push(`${t.name}: ${reason}`),
      onCaseProgress: (name, e) => progress.push(`${name}:${e.stage}`),
    });
    expect(outcomes.map((o) => [o.name, o.status])).toEqual([
      ["a", "done"],
      ["boom", "failed"],
      ["b", "done"],
      ["exit", "failed"],
    ]);
    expect(outcomes[1].reason).toBe("crashed (signal SIGKILL, possibly out of memory)");
    expect(outcomes[3].reason).toMatch(/^crashed \(exit code 7/);
    expect(crashes).toHaveLength(2);
    expect(progress).toContain("a:work");
    expect(outcomes[0].peakRssMb).toBeGreaterThan(10); // a separate node process: tens of MB resident
  });
});
