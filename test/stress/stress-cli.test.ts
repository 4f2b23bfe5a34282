/**
 * `coxa stress` end to end on coxa's own synthetic phantoms (invented anatomy, not a patient;
 * truth known exactly), through the CLI in this process. The checks the issue asks for:
 *  - on the demo phantom (made without artifacts, so severity s adds exactly severity-s
 *    shadowing): at severity 0 both modes succeed in every trial; at severity 1 the masked mode's
 *    success rate is at least the unmasked one's;
 *  - the error of every trial equals an independent recomputation from its stored transform and
 *    the phantom's truth (RMS over a 5 mm lattice in the 60 mm ball around the CT metal centroid,
 *    both rebuilt here from the CT voxels; within 1% of the solid-ball closed form
 *    sqrt(|d(c)|² + R²/5 ||A||_F²)), and the starting pose matches its recorded offsets
 *    (rotation angle from the trace formula);
 *  - the same seed gives identical rows (every column but `seconds`), here across thread counts;
 *  - --virtual-implant on an implant-free phantom puts metal >= 2500 HU at the point and an MR
 *    signal void at the point mapped into MR world;
 *  - bad input (severity outside 0..1, negative offset, reference for other images by hash):
 *    exit 2, a clear message, nothing written.
 * Trial counts are small to keep the run short (about a minute on 2 cores).
 */
import { spawnSync } from "node:child_process";
import { createHash } from "node:crypto";
import { existsSync, readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { fromRows, identity } from "../../src/geometry/mat4.js";
import { buildTransformRecord, imageRef, writeTransform } from "../../src/geometry/transform-file.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { writePhantomCase } from "../../src/phantom/phantom.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir("coxa-stress-");
const clean = join(dir, "clean");
const none = join(dir, "none");
const c = (f: string) => join(clean, f);
const n = (f: string) => join(none, f);

// biome-ignore lint/suspicious/noExplicitAny: stress.json is checked field by field below
type Json = Record<string, any>;

function sha256(path: string): string {
  return createHash("sha256").update(readFileSync(path)).digest("hex");
}

function apply(m: readonly (readonly number[])[], p: readonly number[]): number[] {
  return [0, 1, 2].map((r) => m[r][0] * p[0] + m[r][1] * p[1] + m[r][2] * p[2] + m[r][3]);
}

/** Rows without the wall-time column. */
function strip(rows: Json[]): Json[] {
  return rows.map(({ seconds: _s, ...rest }) => rest);
}

function csvRows(path: string): { header: string; rows: Record<string, string>[]; lines: string[] } {
  const lines = readFileSync(path, "utf8").trim().split("\n");
  const cols = lines[0].split(",");
  return {
    header: lines[0],
    lines,
    rows: lines.slice(1).map((l) => Object.fromEntries(l.split(",").map((v, i) => [cols[i], v]))),
  };
}

/** Independent RMS of |A x - B x| over lattice points c + 5 (a, b, k) mm within 60 mm of c. */
function latticeRms(a: number[][], b: number[][], center: number[]): number {
  let sum = 0;
  let count = 0;
  for (let k = -12; k <= 12; k++) {
    for (let j = -12; j <= 12; j++) {
      for (let i = -12; i <= 12; i++) {
        if (i * i + j * j + k * k > 144) continue;
        const x = [center[0] + 5 * i, center[1] + 5 * j, center[2] + 5 * k];
        const pa = apply(a, x);
        const pb = apply(b, x);
        sum += (pa[0] - pb[0]) ** 2 + (pa[1] - pb[1]) ** 2 + (pa[2] - pb[2]) ** 2;
        count++;
      }
    }
  }
  return Math.sqrt(sum / count);
}

/** Closed-form RMS over the solid ball of radius r: sqrt(|d(c)|² + r²/5 ||A||_F²). */
function ballRms(a: number[][], b: number[][], center: number[], r: number): number {
  const pa = apply(a, center);
  const pb = apply(b, center);
  let d2 = 0;
  let f2 = 0;
  for (let row = 0; row < 3; row++) {
    d2 += (pa[row] - pb[row]) ** 2;
    for (let col = 0; col < 3; col++) f2 += (a[row][col] - b[row][col]) ** 2;
  }
  return Math.sqrt(d2 + ((r * r) / 5) * f2);
}

/** Centroid (world mm) of CT voxels >= 2500 HU, computed here from the voxels. */
function metalCentroid(path: string): number[] {
  const v = readNifti(path).volume;
  const [nx, ny, nz] = v.dims;
  const m = v.indexToWorld;
  const s = [0, 0, 0];
  let count = 0;
  let idx = 0;
  for (let k = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, idx++) {
        if (v.data[idx] < 2500) continue;
        count++;
        for (let r = 0; r < 3; r++) s[r] += m[4 * r] * i + m[4 * r + 1] * j + m[4 * r + 2] * k + m[4 * r + 3];
      }
    }
  }
  return s.map((x) => x / count);
}

const baseArgs = () => [
  "stress",
  "--fixed",
  c("ct.nii.gz"),
  "--moving",
  c("mr.nii.gz"),
  "--truth",
  c("truth.json"),
  "--trials",
  "3",
  "--severities",
  "0,1",
  "--quiet",
];

let first: { code: number; out: string; doc: Json };
let second: { code: number; out: string; doc: Json };
let subset: { code: number; out: string; doc: Json };

beforeAll(async () => {
  await writePhantomCase({ outDir: clean, seed: 1, size: "demo", severity: 0, threads: 2 });
  await writePhantomCase({ outDir: none, seed: 2, size: "demo", implant: "none", threads: 2 });
  const out1 = join(dir, "run1");
  const r1 = await runCoxa([...baseArgs(), "--threads", "2", "--out", out1]);
  expect(r1.stderr).toBe("");
  first = { code: r1.code, out: out1, doc: JSON.parse(readFileSync(join(out1, "stress.json"), "utf8")) };
  const out2 = join(dir, "run2");
  const r2 = await runCoxa([...baseArgs(), "--threads", "2", "--out", out2]);
  second = { code: r2.code, out: out2, doc: JSON.parse(readFileSync(join(out2, "stress.json"), "utf8")) };
  // one trial of one severity on one thread: its rows must be those of the full runs
  const out3 = join(dir, "run3");
  const args3 = baseArgs().map((a, i, all) =>
    all[i - 1] === "--trials" ? "1" : all[i - 1] === "--severities" ? "1" : a,
  );
  const r3 = await runCoxa([...args3, "--threads", "1", "--out", out3]);
  subset = { code: r3.code, out: out3, doc: JSON.parse(readFileSync(join(out3, "stress.json"), "utf8")) };
}, 600_000);

describe("coxa stress on the demo phantom (made without artifacts)", () => {
  it("writes stress.csv with exactly the issue's columns, one row per trial and mode", () => {
    expect(first.code).toBe(0);
    const { header, rows } = csvRows(join(first.out, "stress.csv"));
    expect(header).toBe("severity,trial,offset_mm,offset_deg,mask,error_mm,success,seconds,verdict");
    expect(rows).toHaveLength(2 * 3 * 2);
    expect(rows.map((r) => `${r.severity}-${r.trial}-${r.mask}`)).toEqual([
      "0-1-on",
      "0-1-off",
      "0-2-on",
      "0-2-off",
      "0-3-on",
      "0-3-off",
      "1-1-on",
      "1-1-off",
      "1-2-on",
      "1-2-off",
      "1-3-on",
      "1-3-off",
    ]);
    for (const r of rows) {
      expect(["pass", "review", "fail"]).toContain(r.verdict);
      expect(r.success).toBe(Number(r.error_mm) <= 2 ? "1" : "0");
    }
    expect(readdirSync(join(first.out, "trials")).sort()).toEqual(
      rows.map((r) => `${r.severity}-${r.trial}-${r.mask}.json`).sort(),
    );
  });

  it("succeeds in every trial at severity 0 in both modes; at severity 1 the masked rate >= the unmasked", () => {
    const { rows } = csvRows(join(first.out, "stress.csv"));
    const rate = (sev: string, mask: string) => {
      const sel = rows.filter((r) => r.severity === sev && r.mask === mask);
      return sel.filter((r) => r.success === "1").length / sel.length;
    };
    expect(rate("0", "on")).toBe(1);
    expect(rate("0", "off")).toBe(1);
    expect(rate("1", "on")).toBeGreaterThanOrEqual(rate("1", "off"));
    expect(first.doc.conclusion.text).toMatch(/metal mask on: up to severity 1/);
  });

  it("reports errors equal to an independent recomputation from each stored transform and the truth", () => {
    const truth = JSON.parse(readFileSync(c("truth.json"), "utf8")).fixed_to_moving as number[][];
    const center = metalCentroid(c("ct.nii.gz"));
    const doc = first.doc;
    expect(doc.error.kind).toBe("sphere");
    expect(doc.error.points).toBe(7153);
    for (let a = 0; a < 3; a++) expect(doc.implant.center_mm[a]).toBeCloseTo(center[a], 6);
    const { rows } = csvRows(join(first.out, "stress.csv"));
    const ctSha = sha256(c("ct.nii.gz"));
    const mrSha = sha256(c("mr.nii.gz"));
    for (let i = 0; i < rows.length; i++) {
      const r = rows[i];
      const t = JSON.parse(
        readFileSync(join(first.out, "trials", `${r.severity}-${r.trial}-${r.mask}.json`), "utf8"),
      );
      expect(t.format).toBe("coxa.transform");
      expect(t.maps).toBe("fixed-to-moving");
      expect(t.fixed.sha256).toBe(ctSha);
      expect(t.moving.sha256).toBe(mrSha);
      const rms = latticeRms(t.matrix, truth, center);
      expect(Math.abs(Number(r.error_mm) - rms), `row ${i}`).toBeLessThanOrEqual(5e-5);
      expect(doc.rows[i].error_mm).toBeCloseTo(rms, 9);
      const ball = ballRms(t.matrix, truth, center, 60);
      expect(Math.abs(rms - ball) / Math.max(ball, 1e-6)).toBeLessThan(0.01);
    }
  });

  it("starts each trial from the reference perturbed by the recorded offsets (same start for both modes)", () => {
    const truth = JSON.parse(readFileSync(c("truth.json"), "utf8")).fixed_to_moving as number[][];
    const back = (() => {
      // inverse of the rigid truth: R^T, -R^T t
      const r = [0, 1, 2].map((i) => [0, 1, 2].map((j) => truth[j][i]));
      const t = [0, 1, 2].map(
        (i) => -(r[i][0] * truth[0][3] + r[i][1] * truth[1][3] + r[i][2] * truth[2][3]),
      );
      return [...r.map((row, i) => [...row, t[i]]), [0, 0, 0, 1]];
    })();
    const center = first.doc.implant.center_mm as number[];
    const rows = first.doc.rows as Json[];
    for (let i = 0; i < rows.length; i += 2) {
      expect(rows[i].start_fixed_to_moving).toEqual(rows[i + 1].start_fixed_to_moving);
      const s = rows[i].start_fixed_to_moving as number[][];
      // P = T_ref^-1 S
      const p = [0, 1, 2].map((r) =>
        [0, 1, 2, 3].map(
          (col) =>
            [0, 1, 2].reduce((sum, k) => sum + back[r][k] * s[k][col], 0) + (col === 3 ? back[r][3] : 0),
        ),
      );
      const angle = (Math.acos(Math.min(1, (p[0][0] + p[1][1] + p[2][2] - 1) / 2)) * 180) / Math.PI;
      expect(angle).toBeCloseTo(rows[i].offset_deg, 5);
      expect(angle).toBeLessThanOrEqual(10);
      const pc = apply(p, center);
      const shift = Math.hypot(pc[0] - center[0], pc[1] - center[1], pc[2] - center[2]);
      expect(shift).toBeCloseTo(rows[i].offset_mm, 5);
      expect(shift).toBeLessThanOrEqual(20);
      expect(rows[i].start_error_mm).toBeCloseTo(latticeRms(s, truth, center), 9);
    }
  });

  it("gives identical rows with the same seed (every column but seconds)", () => {
    expect(second.code).toBe(first.code);
    const drop = (lines: string[]) =>
      lines.map((l) =>
        l
          .split(",")
          .filter((_, i) => i !== 7)
          .join(","),
      );
    const a = csvRows(join(first.out, "stress.csv")).lines;
    const b = csvRows(join(second.out, "stress.csv")).lines;
    expect(drop(b)).toEqual(drop(a));
    expect(strip(second.doc.rows)).toEqual(strip(first.doc.rows));
    for (const f of readdirSync(join(first.out, "trials"))) {
      expect(readFileSync(join(second.out, "trials", f), "utf8"), f).toBe(
        readFileSync(join(first.out, "trials", f), "utf8"),
      );
    }
    expect(second.doc.severity_results.map((s: Json) => s.ct)).toEqual(
      first.doc.severity_results.map((s: Json) => s.ct),
    );
  });

  it("gives a trial the same row whatever the thread count, number of trials or other severities", () => {
    const rows = strip(subset.doc.rows);
    expect(rows).toHaveLength(2);
    expect(rows).toEqual(strip(first.doc.rows).filter((r) => r.severity === 1 && r.trial === 1));
    expect(readFileSync(join(subset.out, "trials", "1-1-on.json"), "utf8")).toBe(
      readFileSync(join(first.out, "trials", "1-1-on.json"), "utf8"),
    );
  });

  it("writes an offline stress.html with the three plots, the conclusion and the care note", () => {
    const page = readFileSync(join(first.out, "stress.html"), "utf8");
    expect((page.match(/<svg/g) ?? []).length).toBe(3);
    expect(page).toContain("Success rate against severity");
    expect(page).toContain("Median error against severity");
    expect(page).toContain("Result error against starting offset");
    expect(page).toContain("metal mask on");
    expect(page).toContain("metal mask off");
    expect(page).toContain("Use with care.");
    expect(page).toContain("Largest severity at which at least 95% of trials");
    expect(page).not.toMatch(/<script|(src|href)="https?:/);
  });
});

describe("coxa stress --virtual-implant on an implant-free phantom", () => {
  let out: string;
  let doc: Json;
  let point: number[];
  let reference: number[][];

  beforeAll(async () => {
    const truth = JSON.parse(readFileSync(n("truth.json"), "utf8"));
    point = truth.hip_centers_mm.right;
    reference = truth.fixed_to_moving;
    // a coxa transform file holding the truth, tied to these images by sha256
    const ct = readNifti(n("ct.nii.gz")).volume;
    const mr = readNifti(n("mr.nii.gz")).volume;
    writeTransform(
      join(dir, "none-reference.json"),
      buildTransformRecord({
        model: "rigid",
        matrix: fromRows(reference),
        centerMm: [0, 0, 0],
        fixed: imageRef(n("ct.nii.gz"), ct, sha256(n("ct.nii.gz"))),
        moving: imageRef(n("mr.nii.gz"), mr, sha256(n("mr.nii.gz"))),
      }),
    );
    out = join(dir, "virtual");
    const r = await runCoxa([
      "stress",
      "--fixed",
      n("ct.nii.gz"),
      "--moving",
      n("mr.nii.gz"),
      "--reference",
      join(dir, "none-reference.json"),
      "--fixed-landmarks",
      n("landmarks-ct.csv"),
      "--moving-landmarks",
      n("landmarks-mr.csv"),
      "--virtual-implant",
      point.join(","),
      "--trials",
      "1",
      "--severities",
      "0,1",
      "--save-images",
      "--threads",
      "2",
      "--out",
      out,
      "--quiet",
    ]);
    expect([0, 3]).toContain(r.code);
    doc = JSON.parse(readFileSync(join(out, "stress.json"), "utf8"));
  }, 300_000);

  it("puts metal >= 2500 HU at the given point, where the input CT had none", () => {
    expect(doc.implant.source).toBe("virtual");
    expect(doc.implant.virtual.side).toBe("right");
    expect(doc.implant.ct_metal_voxels).toBe(0);
    const valueAt = (path: string, p: number[]) => {
      const v = readNifti(path).volume;
      const idx = [0, 0, 0];
      v.worldToIndexPoint(idx, p[0], p[1], p[2]);
      const [i, j, k] = idx.map(Math.round);
      return v.data[i + v.dims[0] * (j + v.dims[1] * k)];
    };
    expect(valueAt(n("ct.nii.gz"), point)).toBeLessThan(2500);
    for (const sev of ["0", "1"])
      expect(valueAt(join(out, "images", `ct-${sev}.nii.gz`), point)).toBeGreaterThanOrEqual(2500);
    // and an MR signal void at the point mapped into MR world: below 5% of the input MR there
    const mrPoint = apply(reference, point);
    const before = valueAt(n("mr.nii.gz"), mrPoint);
    expect(before).toBeGreaterThan(100);
    for (const sev of ["0", "1"]) {
      expect(valueAt(join(out, "images", `mr-${sev}.nii.gz`), mrPoint), `severity ${sev}`).toBeLessThan(
        0.05 * before,
      );
    }
  });

  it("uses the transform reference and the landmark error (mean over fixed landmarks, recomputed here)", () => {
    expect(doc.reference.kind).toBe("transform");
    expect(doc.error.kind).toBe("landmarks");
    const lines = readFileSync(n("landmarks-ct.csv"), "utf8").trim().split("\n").slice(1);
    const pts = lines.map((l) => l.split(",").slice(1).map(Number));
    expect(doc.error.points).toBe(pts.length);
    for (const r of doc.rows as Json[]) {
      const t = JSON.parse(readFileSync(join(out, r.transform), "utf8")).matrix as number[][];
      let sum = 0;
      for (const p of pts) {
        const a = apply(t, p);
        const b = apply(reference, p);
        sum += Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2]);
      }
      expect(r.error_mm).toBeCloseTo(sum / pts.length, 9);
    }
  });
});

describe("coxa stress bad input", () => {
  const args = (out: string, extra: string[]) => [
    "stress",
    "--fixed",
    c("ct.nii.gz"),
    "--moving",
    c("mr.nii.gz"),
    "--out",
    out,
    "--quiet",
    ...extra,
  ];

  it.each([
    [
      "a severity outside 0..1",
      ["--truth", c("truth.json"), "--severities", "0,1.5"],
      /1\.5 is outside 0\.\.1/,
    ],
    ["a negative offset in mm", ["--truth", c("truth.json"), "--offset-mm", "-5"], /-5 is outside 0\.\.1000/],
    [
      "a negative offset in degrees",
      ["--truth", c("truth.json"), "--offset-deg=-1"],
      /-1 is outside 0\.\.90/,
    ],
    ["zero trials", ["--truth", c("truth.json"), "--trials", "0"], /0 is outside 1\.\.1000/],
    ["no reference", [], /a reference is needed: give --reference T\.json .* or --truth truth\.json/],
    [
      "both references",
      ["--truth", c("truth.json"), "--reference", c("truth.json")],
      /give either --reference or --truth, not both/,
    ],
    [
      "a truth file of other images",
      ["--truth", n("truth.json")],
      /truth\.json: describes a CT .* it belongs to other images|index_to_world differs/,
    ],
    [
      "moving landmarks without fixed ones",
      ["--truth", c("truth.json"), "--moving-landmarks", c("landmarks-mr.csv")],
      /--moving-landmarks needs --fixed-landmarks/,
    ],
    [
      "a virtual implant outside the CT",
      ["--truth", c("truth.json"), "--virtual-implant", "0,0,900"],
      /lies outside the CT field of view/,
    ],
  ])("%s: exit 2, a clear message, nothing written", async (_name, extra, message) => {
    const out = join(dir, `bad-${Math.random().toString(36).slice(2)}`);
    const r = await runCoxa(args(out, extra as string[]));
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(message as RegExp);
    expect(existsSync(out)).toBe(false);
  });

  it("a reference made for other images: exit 2, HASH_MISMATCH naming the image file", async () => {
    const ct = readNifti(c("ct.nii.gz")).volume;
    const mr = readNifti(c("mr.nii.gz")).volume;
    const ref = join(dir, "other-images.json");
    writeTransform(
      ref,
      buildTransformRecord({
        model: "rigid",
        matrix: identity(),
        centerMm: [0, 0, 0],
        fixed: imageRef(n("ct.nii.gz"), ct, sha256(n("ct.nii.gz"))),
        moving: imageRef(c("mr.nii.gz"), mr, sha256(c("mr.nii.gz"))),
      }),
    );
    const out = join(dir, "bad-hash");
    const r = await runCoxa(args(out, ["--reference", ref]));
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(`coxa: ${c("ct.nii.gz")}: sha256 `);
    expect(r.stderr).toContain(`the fixed image recorded in ${ref}`);
    expect(existsSync(out)).toBe(false);
    const { runStress } = await import("../../src/stress/stress.js");
    await expect(
      runStress({ fixed: c("ct.nii.gz"), moving: c("mr.nii.gz"), out, reference: ref }),
    ).rejects.toMatchObject({
      code: "HASH_MISMATCH",
    });
  });

  it("an MR as the fixed image, and a CT without metal: exit 2 naming the problem", async () => {
    const out = join(dir, "bad-modality");
    const r = await runCoxa([
      "stress",
      "--fixed",
      c("mr.nii.gz"),
      "--moving",
      c("ct.nii.gz"),
      "--truth",
      c("truth.json"),
      "--out",
      out,
    ]);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(`${c("mr.nii.gz")}: does not look like a CT in Hounsfield units`);
    const r2 = await runCoxa([
      "stress",
      "--fixed",
      n("ct.nii.gz"),
      "--moving",
      n("mr.nii.gz"),
      "--truth",
      n("truth.json"),
      "--out",
      out,
    ]);
    expect(r2.code).toBe(2);
    expect(r2.stderr).toContain("the CT holds no metal (no voxel >= 2500 HU); give --virtual-implant X,Y,Z");
    expect(existsSync(out)).toBe(false);
  });
});

describe("the built coxa binary (subprocess)", () => {
  const bin = join(import.meta.dirname, "..", "..", "dist", "cli", "main.js");

  it("stress --help exits 0 and ends with a runnable example", () => {
    const r = spawnSync(process.execPath, [bin, "stress", "--help"], { encoding: "utf8" });
    expect(r.status).toBe(0);
    expect(r.stdout).toContain("--severities <list>");
    expect(r.stdout.replace(/\s+/g, " ")).toContain("each in 0..1 (default: 0,0.25,0.5,0.75,1)");
    expect(r.stdout.trimEnd()).toMatch(
      /--truth data-synthetic\/truth\.json --trials 5 --severities 0,0\.5,1 --out out\/stress$/,
    );
  });

  it("a severity outside 0..1 exits 2 with a message naming the value", () => {
    const out = join(dir, "bad-subprocess");
    const r = spawnSync(
      process.execPath,
      [
        bin,
        "stress",
        "--fixed",
        c("ct.nii.gz"),
        "--moving",
        c("mr.nii.gz"),
        "--truth",
        c("truth.json"),
        "--severities",
        "-0.5",
        "--out",
        out,
      ],
      { encoding: "utf8" },
    );
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(
      /option '--severities <list>' argument '-0\.5' is invalid\. -0\.5 is outside 0\.\.1\./,
    );
    expect(existsSync(out)).toBe(false);
  });
});
