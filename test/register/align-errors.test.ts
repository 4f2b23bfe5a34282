/**
 * `coxa align` bad input: each case exits 2 with one line naming the file and the problem, and
 * leaves nothing in the output folder (all inputs are checked before anything is written).
 */
import { existsSync, readdirSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { compose, scaling, translation } from "../../src/geometry/mat4.js";
import { writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir();
const p = (f: string) => join(dir, f);

/** A small CT-like (HU) or MR-like ellipsoidal body with an inner structure. */
function body(kind: "ct" | "mr", dims: [number, number, number], shiftMm = 0): Volume {
  const [nx, ny, nz] = dims;
  const data = new Int16Array(nx * ny * nz);
  for (let k = 0, q = 0; k < nz; k++)
    for (let j = 0; j < ny; j++)
      for (let i = 0; i < nx; i++, q++) {
        const x = (i - nx / 2) / (nx * 0.4);
        const y = (j - ny / 2) / (ny * 0.3);
        const z = (k - nz / 2) / Math.max(1, nz * 0.45);
        const r = x * x + y * y + z * z;
        const inner = (x - 0.3) ** 2 + y * y < 0.1;
        if (kind === "ct") data[q] = r < 1 ? (inner ? 700 : 40) : -1000;
        else data[q] = r < 1 ? (inner ? 80 : 400) : 5;
      }
  return new Volume(dims, data, compose(translation(-nx + shiftMm, -ny, -nz), scaling(2, 2, 2)));
}

writeNifti(p("ct.nii.gz"), body("ct", [32, 32, 20]), { datatype: "int16" });
writeNifti(p("mr.nii.gz"), body("mr", [32, 32, 20]), { datatype: "int16" });
writeNifti(p("flat.nii.gz"), body("mr", [32, 32, 1]), { datatype: "int16" });
writeNifti(p("far.nii.gz"), body("mr", [32, 32, 20], 5000), { datatype: "int16" });
writeNifti(
  p("empty-mask.nii.gz"),
  new Volume([32, 32, 20], new Uint8Array(32 * 32 * 20), body("ct", [32, 32, 20]).indexToWorld),
  {
    datatype: "uint8",
  },
);
writeFileSync(p("notes.nii.gz"), "this is not an image\n".repeat(30));
writeFileSync(p("lm-a.csv"), "label,x,y,z\nA,1,2,3\nB,4,5,6\nC,7,8,10\n");
writeFileSync(p("lm-nox.csv"), "label,y,z\nA,2,3\nB,5,6\nC,8,10\n");
writeFileSync(p("lm-b.csv"), "label,x,y,z\nA,1,2,3\nB,4,5,6\nD,7,8,10\n");

async function expectRefused(args: string[], file: string, problem: RegExp) {
  const out = p(`out-${Math.random().toString(36).slice(2)}`);
  const r = await runCoxa([
    "align",
    "--fixed",
    p("ct.nii.gz"),
    "--moving",
    p("mr.nii.gz"),
    "--out",
    out,
    "--quiet",
    ...args,
  ]);
  expect(r.code, r.stderr).toBe(2);
  const lines = r.stderr.trim().split("\n");
  expect(lines, r.stderr).toHaveLength(1);
  expect(lines[0]).toContain(file);
  expect(lines[0]).toMatch(problem);
  expect(existsSync(out) ? readdirSync(out) : []).toEqual([]);
}

describe("coxa align refuses bad input (exit 2, one line, no outputs)", () => {
  it("a missing file", () =>
    expectRefused(["--moving", p("missing.nii.gz")], p("missing.nii.gz"), /does not exist/));
  it("a 2-D image", () => expectRefused(["--moving", p("flat.nii.gz")], p("flat.nii.gz"), /not a 3-D image/));
  it("a file that is not NIfTI", () =>
    expectRefused(
      ["--fixed", p("notes.nii.gz")],
      p("notes.nii.gz"),
      /not a NIfTI file|gzip stream is corrupt/,
    ));
  it("fields of view that do not overlap at the start", () =>
    expectRefused(["--moving", p("far.nii.gz"), "--init", "header"], p("ct.nii.gz"), /do not overlap/));
  it("an empty mask", () =>
    expectRefused(
      ["--fixed-mask", p("empty-mask.nii.gz")],
      p("empty-mask.nii.gz"),
      /mask is empty|covers no voxel/,
    ));
  it("a landmark CSV with a missing column", () =>
    expectRefused(
      ["--fixed-landmarks", p("lm-nox.csv"), "--moving-landmarks", p("lm-a.csv")],
      p("lm-nox.csv"),
      /column|header/,
    ));
  it("a landmark label present in only one file", () =>
    expectRefused(
      ["--fixed-landmarks", p("lm-a.csv"), "--moving-landmarks", p("lm-b.csv")],
      p("lm-a.csv"),
      /label "C" has no match in .*lm-b\.csv/,
    ));
  it("an output that would replace an input", async () => {
    const r = await runCoxa([
      "align",
      "--fixed",
      p("ct.nii.gz"),
      "--moving",
      p("mr.nii.gz"),
      "--fixed-landmarks",
      join(dir, "summary.json"),
      "--moving-landmarks",
      p("lm-a.csv"),
      "--out",
      dir,
      "--quiet",
    ]);
    expect(r.code).toBe(2);
  });
  it("bad option values", async () => {
    for (const args of [
      ["--model", "bspline"],
      ["--levels", "8,x"],
      ["--metal-hu", "abc"],
      ["--seed", "-1"],
    ]) {
      const r = await runCoxa([
        "align",
        "--fixed",
        p("ct.nii.gz"),
        "--moving",
        p("mr.nii.gz"),
        "--out",
        p("o"),
        ...args,
      ]);
      expect(r.code, args.join(" ")).toBe(2);
    }
  });
});
