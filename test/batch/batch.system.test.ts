/**
 * `coxa batch` end to end with the built binary on four synthetic demo phantoms (coxa's own
 * invented anatomy, not patients), real registration, real case processes:
 *  - --jobs 2: every case done, cohort.csv agrees with each case's summary.json;
 *  - killed with SIGKILL mid-way, then --resume: every case done exactly once (done-markers
 *    and run records), no temporary file left, every output matches its recorded SHA-256 and
 *    loads in nibabel (Debian python3-nibabel; system suite);
 *  - an input changed after a run is redone on --resume, nothing else;
 *  - shards 1/2 and 2/2, run at the same time, cover every case exactly once; --summarize merges.
 */
import { execFileSync, spawn, spawnSync } from "node:child_process";
import { appendFileSync, existsSync, readdirSync, readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { checkComplete, type DoneMarker, hashInputs } from "../../src/batch/marker.js";
import { parseCsv } from "../../src/common/csv.js";
import { writeDemoPhantom } from "../export/phantom-pair.js";
import { tempDir } from "../helpers/tmp.js";

const PY = "/usr/bin/python3";
const BIN = join(import.meta.dirname, "..", "..", "dist", "cli", "main.js");
const root = tempDir("coxa-batch-sys-");
const site = join(root, "site");
const manifest = join(site, "manifest.csv");
const CASES = ["c1", "c2", "c3", "c4"];
/** Each test runs several real registrations on 2 shared cores. */
const TIMEOUT_MS = 900_000;

beforeAll(async () => {
  for (let n = 0; n < CASES.length; n++) await writeDemoPhantom(join(site, CASES[n]), 21 + n, false);
  const cols = "case,fixed,moving,fixed_landmarks,moving_landmarks,fixed_labels,moving_labels";
  const rows = CASES.map(
    (c) =>
      `${c},${c}/ct.nii.gz,${c}/mr.nii.gz,${c}/landmarks-ct.csv,${c}/landmarks-mr.csv,${c}/labels-ct.nii.gz,${c}/labels-mr.nii.gz`,
  );
  writeFileSync(manifest, `${cols}\n${rows.join("\n")}\n`);
}, 600_000);

function coxa(args: string[]): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: "utf8" });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

function csvRows(path: string): Record<string, string>[] {
  const [head, ...rows] = parseCsv(readFileSync(path, "utf8")).map((r) => r.fields);
  return rows.map((r) => Object.fromEntries(head.map((h, i) => [h, r[i]])));
}

function walk(dir: string): string[] {
  const out: string[] = [];
  for (const e of readdirSync(dir, { withFileTypes: true })) {
    const p = join(dir, e.name);
    if (e.isDirectory()) out.push(...walk(p));
    else out.push(p);
  }
  return out;
}

function runRecords(
  out: string,
): { run: { run_id: string; shard: string | null }; cases: { case: string; action: string }[] }[] {
  const dir = join(out, "batch-runs");
  return existsSync(dir) ? readdirSync(dir).map((f) => JSON.parse(readFileSync(join(dir, f), "utf8"))) : [];
}

/** Every case complete for the current inputs (outputs re-hashed) and every NIfTI readable by nibabel. */
async function expectAllIntact(out: string): Promise<void> {
  const m = csvRows(manifest);
  for (const row of m) {
    const inputs = await hashInputs(
      Object.fromEntries(
        Object.entries(row)
          .filter(([k, v]) => k !== "case" && v !== "")
          .map(([k, v]) => [k, join(site, v)]),
      ),
    );
    const marker = JSON.parse(readFileSync(join(out, row.case, "done.json"), "utf8")) as DoneMarker;
    const check = await checkComplete(join(out, row.case), inputs, marker.settings_sha256);
    expect(check.complete, `${row.case}: ${check.reason}`).toBe(true);
  }
  expect(walk(out).filter((p) => p.includes(".coxa-tmp-"))).toEqual([]);
  const nifti = walk(out).filter((p) => p.endsWith(".nii.gz"));
  const py =
    "import sys, nibabel as nib, numpy as np\nfor p in sys.argv[1:]:\n    float(np.asanyarray(nib.load(p).dataobj).sum())\nprint(len(sys.argv) - 1)";
  expect(execFileSync(PY, ["-c", py, ...nifti], { encoding: "utf8" }).trim()).toBe(String(nifti.length));
}

describe("coxa batch on four demo phantoms", () => {
  it(
    "--jobs 2 --pair: all done; cohort.csv matches each case's summary.json; cohort.html links every report",
    async () => {
      const out = join(root, "A");
      const r = coxa(["batch", manifest, "--out", out, "--jobs", "2", "--pair", "--quiet"]);
      const rows = csvRows(join(out, "cohort.csv"));
      expect(rows.map((x) => x.case)).toEqual(CASES);
      expect(rows.map((x) => x.status)).toEqual(["done", "done", "done", "done"]);
      const anyFail = rows.some((x) => x.verdict === "fail");
      expect(r.code, r.stderr).toBe(anyFail ? 3 : 0);
      const round4 = (v: number) => String(Math.round(v * 1e4) / 1e4);
      for (const row of rows) {
        const s = JSON.parse(readFileSync(join(out, row.case, "summary.json"), "utf8"));
        expect(row.verdict).toBe(s.verdict);
        expect(row.tre_mean_mm).toBe(round4(s.landmarks.tre_mm.mean));
        expect(row.tre_max_mm).toBe(round4(s.landmarks.tre_mm.max));
        expect(row.overlap_fraction).toBe(round4(s.overlap_fraction));
        expect(row.dice_mean).toBe(round4(s.labels.mean_dice));
        expect(row.report).toBe(`${row.case}/report.html`);
        expect(existsSync(join(out, row.case, "pair.nii.gz"))).toBe(true);
      }
      const page = readFileSync(join(out, "cohort.html"), "utf8");
      for (const c of CASES) expect(page).toContain(`href="${c}/report.html"`);
      await expectAllIntact(out);
    },
    TIMEOUT_MS,
  );

  it(
    "SIGKILL mid-way, then --resume: every case done exactly once, nothing corrupt, then a changed input is redone alone",
    async () => {
      const out = join(root, "B");
      const child = spawn(
        process.execPath,
        [BIN, "batch", manifest, "--out", out, "--jobs", "2", "--quiet"],
        {
          stdio: "ignore",
        },
      );
      const doneCount = () => CASES.filter((c) => existsSync(join(out, c, "done.json"))).length;
      await new Promise<void>((resolveWait, reject) => {
        const timer = setInterval(() => {
          if (doneCount() >= 1) {
            clearInterval(timer);
            child.kill("SIGKILL");
            resolveWait();
          }
        }, 100);
        child.on("exit", () => {
          clearInterval(timer);
          reject(new Error("batch finished before it could be killed"));
        });
      });
      const before = doneCount();
      expect(before).toBeGreaterThanOrEqual(1);
      expect(before).toBeLessThan(CASES.length);
      // The orphaned case processes stop when their parent's IPC channel closes: no new markers appear.
      await new Promise((r) => setTimeout(r, 4000));
      expect(doneCount()).toBe(before);
      const killedRun = new Map(
        CASES.filter((c) => existsSync(join(out, c, "done.json"))).map((c) => [
          c,
          JSON.parse(readFileSync(join(out, c, "done.json"), "utf8")).run.run_id,
        ]),
      );

      const r = coxa(["batch", manifest, "--out", out, "--jobs", "2", "--resume", "--json"]);
      expect([0, 3]).toContain(r.code);
      const result = JSON.parse(r.stdout);
      expect(result.skipped.sort()).toEqual([...killedRun.keys()].sort());
      expect([...result.ran, ...result.skipped].sort()).toEqual(CASES);
      expect(result.rows.map((x: { status: string }) => x.status)).toEqual(["done", "done", "done", "done"]);
      const records = runRecords(out);
      expect(records).toHaveLength(1); // the killed run never finished, so it wrote no record
      for (const c of CASES) {
        const marker = JSON.parse(readFileSync(join(out, c, "done.json"), "utf8")) as DoneMarker;
        expect(marker.run.run_id).toBe(killedRun.get(c) ?? records[0].run.run_id);
      }
      await expectAllIntact(out);

      appendFileSync(join(site, "c2", "landmarks-mr.csv"), "\n"); // new bytes, same landmarks
      const again = coxa(["batch", manifest, "--out", out, "--jobs", "2", "--resume", "--json"]);
      const third = JSON.parse(again.stdout);
      expect(third.ran).toEqual(["c2"]);
      expect(third.skipped).toEqual(["c1", "c3", "c4"]);
      await expectAllIntact(out);
    },
    TIMEOUT_MS,
  );

  it(
    "shards 1/2 and 2/2 at the same time cover every case exactly once; --summarize merges them",
    async () => {
      const out = join(root, "D");
      const runShard = (k: number) =>
        new Promise<number | null>((resolveRun) => {
          const p = spawn(
            process.execPath,
            [BIN, "batch", manifest, "--out", out, "--shard", `${k}/2`, "--quiet"],
            { stdio: "ignore" },
          );
          p.on("exit", (code) => resolveRun(code));
        });
      const codes = await Promise.all([runShard(1), runShard(2)]);
      for (const code of codes) expect([0, 3]).toContain(code);
      const records = runRecords(out);
      expect(records.map((x) => x.run.shard).sort()).toEqual(["1/2", "2/2"]);
      const ran = records.flatMap((x) => x.cases.filter((c) => c.action === "ran").map((c) => c.case));
      expect(ran.sort()).toEqual(CASES);
      expect(csvRows(join(out, "cohort-shard-1-of-2.csv")).map((x) => x.case)).toEqual(["c1", "c3"]);
      expect(csvRows(join(out, "cohort-shard-2-of-2.csv")).map((x) => x.case)).toEqual(["c2", "c4"]);
      const s = coxa(["batch", "--summarize", out]);
      expect([0, 3]).toContain(s.code);
      const rows = csvRows(join(out, "cohort.csv"));
      expect(rows.map((x) => [x.case, x.status])).toEqual(CASES.map((c) => [c, "done"]));
      await expectAllIntact(out);
    },
    TIMEOUT_MS,
  );
});
