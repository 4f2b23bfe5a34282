/** Manifest validation: every problem is BAD_MANIFEST naming the manifest and the line. */
import { mkdirSync, symlinkSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { isSafeCaseName, parseManifest, readManifest } from "../../src/batch/manifest.js";
import { tempDir } from "../helpers/tmp.js";

const root = tempDir("coxa-manifest-");
const site = join(root, "site");
const outside = join(root, "outside");
mkdirSync(join(site, "p1"), { recursive: true });
mkdirSync(join(site, "p2"), { recursive: true });
mkdirSync(outside, { recursive: true });
for (const f of ["p1/ct.nii.gz", "p1/mr.nii.gz", "p2/ct.nii.gz", "p2/mr.nii.gz", "p1/a.csv", "p1/b.csv"]) {
  writeFileSync(join(site, f), "x");
}
writeFileSync(join(outside, "ct.nii.gz"), "x");
symlinkSync(join(outside, "ct.nii.gz"), join(site, "p2", "linked.nii.gz"));

function write(name: string, text: string): string {
  const path = join(site, name);
  writeFileSync(path, text);
  return path;
}

function expectManifestError(path: string, pattern: RegExp, options = {}): void {
  try {
    readManifest(path, options);
    expect.fail("no error");
  } catch (err) {
    expect((err as { code: string }).code).toBe("BAD_MANIFEST");
    const message = (err as Error).message;
    expect(message.startsWith(`${path}: `)).toBe(true);
    expect(message.split("\n")).toHaveLength(1);
    expect(message).toMatch(pattern);
  }
}

describe("readManifest", () => {
  it("resolves paths against the manifest's folder, keeps order, accepts quoted fields, comments, CRLF and any column order", () => {
    const path = write(
      "ok.csv",
      '\ufeffmoving,CASE,fixed,fixed_landmarks,moving_landmarks\r\n# a comment line\r\np1/mr.nii.gz,p1,"p1/ct.nii.gz",p1/a.csv,p1/b.csv\r\n\r\n' +
        `p2/mr.nii.gz, p2 ,${join(site, "p2", "ct.nii.gz")},,\r\n`,
    );
    const m = readManifest(path);
    expect(m.dir).toBe(site);
    expect(m.cases.map((c) => [c.name, c.index, c.line])).toEqual([
      ["p1", 0, 3],
      ["p2", 1, 5],
    ]);
    expect(m.cases[0].inputs).toEqual({
      fixed: join(site, "p1", "ct.nii.gz"),
      moving: join(site, "p1", "mr.nii.gz"),
      fixed_landmarks: join(site, "p1", "a.csv"),
      moving_landmarks: join(site, "p1", "b.csv"),
    });
    expect(m.cases[1].inputs.fixed_landmarks).toBeUndefined();
  });

  it("a missing file: the line, the column and the path", () => {
    const path = write(
      "missing.csv",
      "case,fixed,moving\np1,p1/ct.nii.gz,p1/mr.nii.gz\np2,p2/ct.nii.gz,p2/nothing.nii.gz\n",
    );
    expectManifestError(path, /^.*: line 3: moving file "p2\/nothing\.nii\.gz" does not exist/);
  });

  it("a duplicate case name, also differing only by case", () => {
    const dup = write(
      "dup.csv",
      "case,fixed,moving\np1,p1/ct.nii.gz,p1/mr.nii.gz\nP1,p2/ct.nii.gz,p2/mr.nii.gz\n",
    );
    expectManifestError(dup, /line 3: case "P1" repeats the case name of line 2/);
  });

  it("unknown, repeated and missing columns", () => {
    expectManifestError(
      write("c1.csv", "case,fixed,moving,weight\np1,p1/ct.nii.gz,p1/mr.nii.gz,3\n"),
      /line 1: unknown column "weight"/,
    );
    expectManifestError(write("c2.csv", "case,fixed,fixed,moving\n"), /line 1: column "fixed" appears twice/);
    expectManifestError(
      write("c3.csv", "case,fixed\np1,p1/ct.nii.gz\n"),
      /line 1: required column "moving" is missing/,
    );
    expectManifestError(
      write("c4.csv", "case,fixed,moving\np1,p1/ct.nii.gz\n"),
      /line 2: 2 fields, the header has 3/,
    );
  });

  it("unsafe case names", () => {
    for (const bad of [
      "../up",
      "a/b",
      ".hidden",
      "cohort.csv",
      "cohort-shard-1-of-2.html",
      "batch-runs",
      "with space",
      "x".repeat(101),
    ]) {
      expect(isSafeCaseName(bad), bad).toBe(false);
    }
    for (const good of ["p1", "site-A_003", "2024.05.01"]) expect(isSafeCaseName(good), good).toBe(true);
    expectManifestError(
      write("n.csv", "case,fixed,moving\n../up,p1/ct.nii.gz,p1/mr.nii.gz\n"),
      /line 2: case name "\.\.\/up" is not a safe folder name/,
    );
    expectManifestError(
      write("n2.csv", "case,fixed,moving\n,p1/ct.nii.gz,p1/mr.nii.gz\n"),
      /line 2: case name is empty/,
    );
  });

  it("empty manifests and landmark files without their partner", () => {
    expectManifestError(write("e0.csv", ""), /manifest is empty/);
    expectManifestError(write("e1.csv", "case,fixed,moving\n\n"), /header but no cases/);
    expectManifestError(
      write(
        "lm.csv",
        "case,fixed,moving,fixed_landmarks,moving_landmarks\np1,p1/ct.nii.gz,p1/mr.nii.gz,p1/a.csv,\n",
      ),
      /line 2: case "p1" gives fixed_landmarks but no moving_landmarks/,
    );
    expectManifestError(
      write("nofixed.csv", "case,fixed,moving\np1,,p1/mr.nii.gz\n"),
      /line 2: case "p1" has no fixed image/,
    );
    expectManifestError(
      write("q.csv", 'case,fixed,moving\np1,"p1/ct.nii.gz,p1/mr.nii.gz\n'),
      /line 2: quoted field is never closed/,
    );
  });

  it("--confine refuses .. escapes and symbolic links that lead out; without it they are accepted", () => {
    const up = write("up.csv", "case,fixed,moving\np1,../outside/ct.nii.gz,p1/mr.nii.gz\n");
    expect(readManifest(up).cases[0].inputs.fixed).toBe(join(outside, "ct.nii.gz"));
    expectManifestError(up, /line 2: fixed path "\.\.\/outside\/ct\.nii\.gz" leaves the manifest's folder/, {
      confine: true,
    });
    const abs = write("abs.csv", `case,fixed,moving\np1,${join(outside, "ct.nii.gz")},p1/mr.nii.gz\n`);
    expectManifestError(abs, /leaves the manifest's folder/, { confine: true });
    const link = write("link.csv", "case,fixed,moving\np2,p2/linked.nii.gz,p2/mr.nii.gz\n");
    expect(readManifest(link).cases).toHaveLength(1);
    expectManifestError(
      link,
      /line 2: fixed path "p2\/linked\.nii\.gz" leads outside the manifest's folder through a symbolic link/,
      {
        confine: true,
      },
    );
    // A path that goes up and comes back in stays inside.
    const back = write("back.csv", "case,fixed,moving\np1,p1/../p1/ct.nii.gz,p1/mr.nii.gz\n");
    expect(readManifest(back, { confine: true }).cases[0].inputs.fixed).toBe(join(site, "p1", "ct.nii.gz"));
  });

  it("a missing manifest or a directory", () => {
    expectManifestError(join(site, "none.csv"), /manifest file does not exist/);
    expectManifestError(site, /is a directory/);
  });

  it("parseManifest with checkFiles false accepts files that are not there", () => {
    const m = parseManifest("case,fixed,moving\nz9,z9/ct.nii,z9/mr.nii\n", join(site, "virtual.csv"), {
      checkFiles: false,
    });
    expect(m.cases[0].inputs.moving).toBe(join(site, "z9", "mr.nii"));
  });
});
