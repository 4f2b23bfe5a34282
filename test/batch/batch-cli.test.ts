/** `coxa batch` CLI, in-process: usage and manifest errors exit 2 with one line and write nothing. */
import { existsSync, mkdirSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { afterEach, beforeEach, describe, expect, it } from "vitest";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const root = tempDir("coxa-batch-cli-");
const site = join(root, "site");
for (const c of ["p1", "p2"]) {
  mkdirSync(join(site, c), { recursive: true });
  writeFileSync(join(site, c, "ct.nii.gz"), "x");
  writeFileSync(join(site, c, "mr.nii.gz"), "x");
}
mkdirSync(join(root, "elsewhere"), { recursive: true });
writeFileSync(join(root, "elsewhere", "ct.nii.gz"), "x");

function manifest(name: string, text: string): string {
  const path = join(site, name);
  writeFileSync(path, text);
  return path;
}

const SLURM = [
  "SLURM_ARRAY_TASK_ID",
  "SLURM_ARRAY_TASK_COUNT",
  "SLURM_ARRAY_TASK_MIN",
  "SLURM_ARRAY_TASK_MAX",
  "SLURM_ARRAY_TASK_STEP",
];
let saved: Record<string, string | undefined> = {};
beforeEach(() => {
  saved = Object.fromEntries(SLURM.map((k) => [k, process.env[k]]));
  for (const k of SLURM) delete process.env[k];
});
afterEach(() => {
  for (const k of SLURM)
    if (saved[k] === undefined) delete process.env[k];
    else process.env[k] = saved[k];
});

async function expectExit2(args: string[], pattern: RegExp, out?: string): Promise<void> {
  const r = await runCoxa(args);
  expect(r.code, r.stderr).toBe(2);
  // One line naming the problem; commander's usage errors add the shared "(run with --help ...)" hint.
  const lines = r.stderr.trim().split("\n");
  expect(lines[0], r.stderr).toMatch(pattern);
  expect(lines.slice(1), r.stderr).toEqual(lines.length > 1 ? ["(run with --help for usage)"] : []);
  if (out) expect(existsSync(out)).toBe(false);
}

describe("coxa batch: errors before anything runs", () => {
  it("a manifest with a missing file, a duplicate case, a bad column, or a path escaping with --confine", async () => {
    const out = join(root, "out1");
    const missing = manifest(
      "m1.csv",
      "case,fixed,moving\np1,p1/ct.nii.gz,p1/mr.nii.gz\np2,p2/ct.nii.gz,p2/gone.nii.gz\n",
    );
    await expectExit2(
      ["batch", missing, "--out", out],
      /m1\.csv: line 3: moving file "p2\/gone\.nii\.gz" does not exist/,
      out,
    );
    const dup = manifest(
      "m2.csv",
      "case,fixed,moving\np1,p1/ct.nii.gz,p1/mr.nii.gz\np1,p2/ct.nii.gz,p2/mr.nii.gz\n",
    );
    await expectExit2(["batch", dup, "--out", out], /m2\.csv: line 3: case "p1" repeats/, out);
    const col = manifest("m3.csv", "case,fixed,moving,notes\np1,p1/ct.nii.gz,p1/mr.nii.gz,x\n");
    await expectExit2(["batch", col, "--out", out], /m3\.csv: line 1: unknown column "notes"/, out);
    const esc = manifest("m4.csv", "case,fixed,moving\np1,../elsewhere/ct.nii.gz,p1/mr.nii.gz\n");
    await expectExit2(
      ["batch", esc, "--out", out, "--confine"],
      /m4\.csv: line 2: fixed path "\.\.\/elsewhere\/ct\.nii\.gz" leaves/,
      out,
    );
    const unsafe = manifest("m5.csv", "case,fixed,moving\n../p1,p1/ct.nii.gz,p1/mr.nii.gz\n");
    await expectExit2(
      ["batch", unsafe, "--out", out],
      /line 2: case name "\.\.\/p1" is not a safe folder name/,
      out,
    );
    await expectExit2(["batch", manifest("m6.csv", ""), "--out", out], /m6\.csv: manifest is empty/, out);
  });

  it("bad options: shard text, auto outside an array task, jobs, missing manifest or --out, --slices without --pair", async () => {
    const ok = manifest("ok.csv", "case,fixed,moving\np1,p1/ct.nii.gz,p1/mr.nii.gz\n");
    const out = join(root, "out2");
    await expectExit2(["batch", ok, "--out", out, "--shard", "3/2"], /shard "3\/2" needs 1 <= K <= N/, out);
    await expectExit2(
      ["batch", ok, "--out", out, "--shard", "auto"],
      /--shard auto needs SLURM_ARRAY_TASK_ID/,
      out,
    );
    await expectExit2(["batch", ok, "--out", out, "--jobs", "0"], /outside 1\.\.256/, out);
    await expectExit2(["batch", "--out", out], /batch needs a MANIFEST/, out);
    await expectExit2(["batch", ok], /batch needs --out DIR/);
    await expectExit2(["batch", ok, "--out", out, "--slices"], /--slices needs --pair/, out);
    await expectExit2(
      ["batch", ok, "--out", out, "--model", "spline"],
      /Allowed choices are rigid, similarity, affine/,
      out,
    );
  });

  it("--summarize on a folder without cases exits 2", async () => {
    const empty = join(root, "empty");
    mkdirSync(empty, { recursive: true });
    await expectExit2(["batch", "--summarize", empty], /holds no case folders/);
    await expectExit2(["batch", "--summarize", join(root, "nope")], /batch output folder does not exist/);
  });

  it("--help exits 0, documents the exit codes and ends with examples", async () => {
    const r = await runCoxa(["batch", "--help"]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Exit code: 0 every case done with verdict pass or review; 3 /);
    expect(r.stdout).toMatch(/Examples:\n\s+coxa batch /);
  });
});
