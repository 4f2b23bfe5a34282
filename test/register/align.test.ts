/**
 * `coxa align` end to end on the bundled synthetic phantom (data-synthetic/, truth known
 * exactly: landmarks-mr = truth · landmarks-ct). Checks against things outside the code under
 * test: the phantom's truth, an independent recomputation of the TRE from transform.json and the
 * landmark CSVs (plain JSON/CSV parsing, arithmetic in the test), and Dice recomputed by hand
 * from `coxa resample` output.
 */
import { existsSync, readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { readNifti } from "../../src/image/nifti-read.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const DATA = join(import.meta.dirname, "..", "..", "data-synthetic");
const d = (f: string) => join(DATA, f);
const dir = tempDir();
const out = join(dir, "align");

/** Landmark CSV read independently of src/geometry/landmarks.ts (header label,x,y,z). */
function csvPoints(path: string): Map<string, number[]> {
  const lines = readFileSync(path, "utf8").trim().split(/\r?\n/);
  expect(lines[0]).toBe("label,x,y,z");
  return new Map(
    lines.slice(1).map((l) => {
      const [label, x, y, z] = l.split(",");
      return [label, [Number(x), Number(y), Number(z)]];
    }),
  );
}

function apply(rows: number[][], p: number[]): number[] {
  return [0, 1, 2].map((r) => rows[r][0] * p[0] + rows[r][1] * p[1] + rows[r][2] * p[2] + rows[r][3]);
}

// biome-ignore lint/suspicious/noExplicitAny: summary.json is checked field by field below
let summary: Record<string, any>;
let code: number;

beforeAll(async () => {
  const r = await runCoxa([
    "align",
    "--fixed",
    d("ct.nii.gz"),
    "--moving",
    d("mr.nii.gz"),
    "--fixed-landmarks",
    d("landmarks-ct.csv"),
    "--moving-landmarks",
    d("landmarks-mr.csv"),
    "--fixed-labels",
    d("labels-ct.nii.gz"),
    "--moving-labels",
    d("labels-mr.nii.gz"),
    "--out",
    out,
    "--quiet",
  ]);
  code = r.code;
  summary = JSON.parse(readFileSync(join(out, "summary.json"), "utf8"));
}, 300_000);

describe("coxa align on the demo phantom", () => {
  it("passes and recovers the truth: mean TRE <= 0.5 mm, max <= 1.0 mm (accuracy target)", () => {
    expect(code).toBe(0);
    expect(summary.verdict).toBe("pass");
    expect(summary.landmarks.count).toBe(csvPoints(d("landmarks-ct.csv")).size);
    expect(summary.landmarks.tre_mm.mean).toBeLessThanOrEqual(0.5);
    expect(summary.landmarks.tre_mm.max).toBeLessThanOrEqual(1.0);
    expect(summary.ct_image).toBe("fixed");
    expect(summary.masks.fixed.metal_excluded).toBe(true);
  });

  it("transform.json is within 1 mm of the phantom's truth over the whole CT field of view", () => {
    const t = JSON.parse(readFileSync(join(out, "transform.json"), "utf8"));
    const truth = JSON.parse(readFileSync(d("truth.json"), "utf8")).fixed_to_moving as number[][];
    const ct = readNifti(d("ct.nii.gz")).volume;
    const box = ct.boundsWorld();
    let worst = 0;
    for (let c = 0; c < 8; c++) {
      const p = [
        c & 1 ? box.max[0] : box.min[0],
        c & 2 ? box.max[1] : box.min[1],
        c & 4 ? box.max[2] : box.min[2],
      ];
      const a = apply(t.matrix, p);
      const b = apply(truth, p);
      worst = Math.max(worst, Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2]));
    }
    expect(worst).toBeLessThan(1.0);
  });

  it("summary.json TRE equals an independent computation from transform.json and the landmark files", () => {
    const t = JSON.parse(readFileSync(join(out, "transform.json"), "utf8"));
    const fixed = csvPoints(d("landmarks-ct.csv"));
    const moving = csvPoints(d("landmarks-mr.csv"));
    const errors = [...fixed].map(([label, p]) => {
      const q = moving.get(label)!;
      const m = apply(t.matrix, p);
      return { label, e: Math.hypot(m[0] - q[0], m[1] - q[1], m[2] - q[2]) };
    });
    const mean = errors.reduce((s, x) => s + x.e, 0) / errors.length;
    const max = Math.max(...errors.map((x) => x.e));
    expect(summary.landmarks.tre_mm.mean).toBeCloseTo(mean, 9);
    expect(summary.landmarks.tre_mm.max).toBeCloseTo(max, 9);
    for (const { label, e } of errors) {
      const row = summary.landmarks.per_point.find((p: { label: string }) => p.label === label);
      expect(row.error_mm, label).toBeCloseTo(e, 9);
    }
  });

  it("transform.json follows the contract (format, maps, frame, hashes, inverse)", () => {
    const t = JSON.parse(readFileSync(join(out, "transform.json"), "utf8"));
    expect(t.format).toBe("coxa.transform");
    expect(t.version).toBe(1);
    expect(t.model).toBe("rigid");
    expect(t.maps).toBe("fixed-to-moving");
    expect(t.frame).toBe("RAS");
    expect(t.units).toBe("mm");
    expect(t.fixed.sha256).toMatch(/^[0-9a-f]{64}$/);
    expect(t.moving.shape).toEqual([...readNifti(d("mr.nii.gz")).volume.dims]);
    expect(Object.keys(t.parameters).sort()).toEqual([
      "center_mm",
      "rotation_deg",
      "scale",
      "shear",
      "translation_mm",
    ]);
    // inverse · matrix = I
    for (let r = 0; r < 4; r++)
      for (let c = 0; c < 4; c++) {
        let s = 0;
        for (let k = 0; k < 4; k++) s += t.inverse[r][k] * t.matrix[k][c];
        expect(s).toBeCloseTo(r === c ? 1 : 0, 9);
      }
  });

  it("summary.json has the contract's keys", () => {
    for (const key of [
      "verdict",
      "reasons",
      "metric",
      "overlap_fraction",
      "timing_s",
      "landmarks",
      "labels",
      "inverse_consistency_mm",
    ]) {
      expect(summary, key).toHaveProperty(key);
    }
    expect(summary.metric.name).toBe("mi");
    expect(summary.metric.final).toBeGreaterThan(summary.metric.start);
    expect(summary.timing_s.total).toBeGreaterThan(0);
    // The registration's elapsed share (both images in memory -> forward answer) holds at least
    // the search and the levels, which start only then, and fits inside the whole run.
    const t = summary.timing_s;
    expect(t.register_elapsed).toBeGreaterThanOrEqual(t.register_search + t.register_optimise - 0.005);
    expect(t.register_elapsed).toBeLessThan(t.total);
    expect(summary.inverse_consistency_mm).toBeLessThan(1);
    expect(summary.landmarks).toHaveProperty("fre_mm");
    expect(summary.landmarks).toHaveProperty("predicted_tre_mm");
  });

  it("moving-on-fixed.nii.gz is on the fixed grid", () => {
    const ct = readNifti(d("ct.nii.gz")).volume;
    const r = readNifti(join(out, "moving-on-fixed.nii.gz")).volume;
    expect(r.dims).toEqual(ct.dims);
    for (let i = 0; i < 16; i++) expect(r.indexToWorld[i]).toBeCloseTo(ct.indexToWorld[i], 4);
  });

  it("coxa resample of the labels with the stored transform gives the Dice the summary reports", async () => {
    const lab = join(dir, "labels-mr-on-ct.nii.gz");
    const r = await runCoxa([
      "resample",
      "--image",
      d("labels-mr.nii.gz"),
      "--onto",
      d("ct.nii.gz"),
      "--transform",
      join(out, "transform.json"),
      "--interp",
      "nearest",
      "--out",
      lab,
      "--quiet",
    ]);
    expect(r.code).toBe(0);
    const a = readNifti(d("labels-ct.nii.gz")).volume.data;
    const b = readNifti(lab).volume.data;
    expect(a.length).toBe(b.length);
    // Dice (1945): 2|A∩B| / (|A| + |B|), by hand.
    for (const row of summary.labels.per_label.slice(0, 12)) {
      let na = 0;
      let nb = 0;
      let both = 0;
      for (let i = 0; i < a.length; i++) {
        const x = a[i] === row.label;
        const y = b[i] === row.label;
        if (x) na++;
        if (y) nb++;
        if (x && y) both++;
      }
      expect((2 * both) / (na + nb), row.name).toBeCloseTo(row.dice, 12);
    }
    // Large compact structures overlap well after alignment (the MR labels sit on 7 mm oblique
    // slices, so thin or elongated structures lose more to nearest-neighbour staircasing).
    expect(summary.labels.dice.pelvic_fat).toBeGreaterThan(0.9);
    expect(summary.labels.dice.gluteus_maximus_left).toBeGreaterThan(0.9);
  });

  it("coxa landmarks on the stored transform reports the same TRE", async () => {
    const r = await runCoxa([
      "landmarks",
      "--transform",
      join(out, "transform.json"),
      "--fixed-landmarks",
      d("landmarks-ct.csv"),
      "--moving-landmarks",
      d("landmarks-mr.csv"),
      "--json",
    ]);
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.landmarks.tre_mm.mean).toBeCloseTo(summary.landmarks.tre_mm.mean, 12);
    expect(j.verdict).toBe("pass");
  });

  it("leaves only the four outputs in the folder (no temporary files)", () => {
    expect(readdirSync(out).sort()).toEqual([
      "moving-on-fixed.nii.gz",
      "report.html",
      "summary.json",
      "transform.json",
    ]);
    expect(existsSync(join(out, "report.html"))).toBe(true);
  });
});
