/**
 * Reading the reference of a stress run, and checking the run's numbers. External checks: the
 * truth.json layout that `coxa phantom` writes (format "coxa.phantom-truth", fixed_to_moving as
 * 4 rows of 4, ct/mr grid blocks), and the option ranges the issue fixes (severities in 0..1,
 * offsets not negative).
 */
import { writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { fromRows, toRows } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import { readReferenceTruth } from "../../src/stress/reference.js";
import { resolveStressSettings } from "../../src/stress/stress.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir("coxa-stress-ref-");
const ctAffine = fromRows([
  [-2, 0, 0, 100],
  [0, -2, 0, 90],
  [0, 0, 3, -200],
  [0, 0, 0, 1],
]);
const mrAffine = fromRows([
  [3, 0, 0, -90],
  [0, 3, 0, -80],
  [0, 0, 6, -150],
  [0, 0, 0, 1],
]);
const ct = new Volume([8, 8, 4], new Int16Array(256), ctAffine);
const mr = new Volume([6, 6, 3], new Int16Array(108), mrAffine);
const matrix = [
  [0.99, -0.02, 0, 5],
  [0.02, 0.99, 0, -4],
  [0, 0, 1, 12],
  [0, 0, 0, 1],
];

function truthFile(name: string, doc: unknown): string {
  const path = join(dir, name);
  writeFileSync(path, typeof doc === "string" ? doc : JSON.stringify(doc));
  return path;
}

const good = {
  format: "coxa.phantom-truth",
  fixed_to_moving: matrix,
  ct: { shape: [8, 8, 4], index_to_world: toRows(ctAffine) },
  mr: { shape: [6, 6, 3], index_to_world: toRows(mrAffine) },
};

describe("readReferenceTruth", () => {
  it("returns fixed_to_moving of a truth file that describes the images", () => {
    const ref = readReferenceTruth(truthFile("good.json", good), ct, mr);
    expect(ref.kind).toBe("truth");
    expect(toRows(ref.matrix)).toEqual(matrix);
  });

  it("accepts affines that differ by float32 rounding (NIfTI headers store float32)", () => {
    const rows = toRows(ctAffine).map((r) => r.map((v) => v + 1e-5));
    rows[3] = [0, 0, 0, 1];
    expect(() =>
      readReferenceTruth(
        truthFile("f32.json", { ...good, ct: { shape: [8, 8, 4], index_to_world: rows } }),
        ct,
        mr,
      ),
    ).not.toThrow();
  });

  it.each([
    ["not JSON", "{ nope", /is not valid JSON/, "BAD_TRANSFORM"],
    ["another format", { ...good, format: "coxa.transform" }, /is not a phantom truth file/, "BAD_TRANSFORM"],
    [
      "a 3x4 matrix",
      { ...good, fixed_to_moving: matrix.slice(0, 3) },
      /fixed_to_moving must be 4 rows of 4 numbers/,
      "BAD_TRANSFORM",
    ],
    [
      "a singular matrix",
      {
        ...good,
        fixed_to_moving: [
          [0, 0, 0, 1],
          [0, 1, 0, 0],
          [0, 0, 1, 0],
          [0, 0, 0, 1],
        ],
      },
      /fixed_to_moving is singular/,
      "BAD_TRANSFORM",
    ],
    [
      "another CT shape",
      { ...good, ct: { ...good.ct, shape: [8, 8, 5] } },
      /describes a CT of shape 8 x 8 x 5, but the fixed image is 8 x 8 x 4/,
      "BAD_INPUT",
    ],
    [
      "another MR affine",
      { ...good, mr: { shape: [6, 6, 3], index_to_world: toRows(ctAffine) } },
      /mr\.index_to_world differs from the moving image's affine/,
      "BAD_INPUT",
    ],
  ])("refuses %s, naming the file", (name, doc, message, code) => {
    const path = truthFile(`${String(name).replace(/\W+/g, "-")}.json`, doc);
    let caught: unknown;
    try {
      readReferenceTruth(path, ct, mr);
    } catch (err) {
      caught = err;
    }
    expect(caught).toMatchObject({ code });
    expect((caught as Error).message).toMatch(message as RegExp);
    expect((caught as Error).message.startsWith(`${path}: `)).toBe(true);
  });

  it("refuses a missing file", () => {
    expect(() => readReferenceTruth(join(dir, "absent.json"), ct, mr)).toThrowError(
      /truth file does not exist/,
    );
  });
});

describe("resolveStressSettings", () => {
  const base = { fixed: "a", moving: "b", out: "c" };

  it("fills the defaults and sorts the severities", () => {
    expect(resolveStressSettings(base)).toEqual({
      trials: 10,
      severities: [0, 0.25, 0.5, 0.75, 1],
      offsetMm: 20,
      offsetDeg: 10,
      successMm: 2,
      seed: 1,
    });
    expect(resolveStressSettings({ ...base, severities: [1, 0, 0.5] }).severities).toEqual([0, 0.5, 1]);
  });

  it.each([
    [{ severities: [0, 1.5] }, /severity 1.5 is outside 0..1/],
    [{ severities: [-0.1] }, /severity -0.1 is outside 0..1/],
    [{ severities: [Number.NaN] }, /severity NaN is outside 0..1/],
    [{ severities: [0.5, 0.5] }, /severity 0.5 is listed twice/],
    [{ severities: [] }, /--severities needs at least one value/],
    [{ offsetMm: -5 }, /--offset-mm -5 must be a finite number >= 0/],
    [{ offsetDeg: -1 }, /--offset-deg -1 must lie in 0..90/],
    [{ offsetDeg: 120 }, /--offset-deg 120 must lie in 0..90/],
    [{ trials: 0 }, /--trials 0 must be a whole number from 1 to 1000/],
    [{ trials: 2.5 }, /--trials 2.5 must be a whole number/],
    [{ successMm: 0 }, /--success-mm 0 must be a finite number > 0/],
  ])("refuses %o with BAD_ARGUMENT", (extra, message) => {
    expect(() => resolveStressSettings({ ...base, ...extra })).toThrowError(message);
    try {
      resolveStressSettings({ ...base, ...extra });
    } catch (err) {
      expect((err as { code: string }).code).toBe("BAD_ARGUMENT");
    }
  });
});
