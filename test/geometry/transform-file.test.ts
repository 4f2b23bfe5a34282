// transform.json as design.md fixes it: build, write, read, validation, image hashes, and the
// canonical matrix hash against Python's hashlib + struct (fixture from
// scripts/make-fixtures-geometry.py).
import { createHash } from "node:crypto";
import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, describe, expect, test } from "vitest";
import type { CoxaError } from "../../src/common/errors.js";
import { softwareVersion } from "../../src/common/version.js";
import { fromRows, identity, type Mat4, multiply } from "../../src/geometry/mat4.js";
import {
  buildTransformRecord,
  checkTransformImageFiles,
  checkTransformImages,
  INVERSE_TOLERANCE_MM,
  imageRef,
  readTransform,
  type TransformRecord,
  transformHash,
  writeTransform,
} from "../../src/geometry/transform-file.js";
import { describeParameters, parametersToMatrix } from "../../src/geometry/transform-model.js";
import { expectAllClose, flat } from "../helpers/close.js";

const ref = JSON.parse(readFileSync(new URL("../fixtures/geometry/reference.json", import.meta.url), "utf8"));
const dir = mkdtempSync(join(tmpdir(), "coxa-transform-"));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const fixedGrid = fromRows([
  [-0.8, 0, 0, 200],
  [0, -0.8, 0, 180],
  [0, 0, 2.5, -100],
]);
const movingGrid = fromRows([
  [1, 0, 0, -190],
  [0, 1, 0, -170],
  [0, 0, 3, -90],
]);
const fixedRef = imageRef("fixed.nii.gz", { dims: [512, 512, 200], indexToWorld: fixedGrid }, "a".repeat(64));
const movingRef = imageRef(
  "moving.nii.gz",
  { dims: [384, 384, 60], indexToWorld: movingGrid },
  "B".repeat(64),
);
const center = [-4.4, -24.4, 148.75];
const params = [3, -2, 5, 1.5, -7, 12];
const matrix = parametersToMatrix(new Float64Array(16), "rigid", params, center);

function record(): TransformRecord {
  return buildTransformRecord({
    model: "rigid",
    matrix,
    centerMm: center,
    parameters: params,
    fixed: fixedRef,
    moving: movingRef,
  });
}
function writeJson(value: unknown, name = `t-${Math.random().toString(36).slice(2)}.json`): string {
  const p = join(dir, name);
  writeFileSync(p, typeof value === "string" ? value : JSON.stringify(value));
  return p;
}
function errorOf(fn: () => unknown): CoxaError {
  try {
    fn();
  } catch (err) {
    return err as CoxaError;
  }
  throw new Error("expected an error");
}

describe("buildTransformRecord / writeTransform / readTransform", () => {
  test("the record has exactly the design.md fields and values", () => {
    const r = record();
    expect(Object.keys(r).sort()).toEqual(
      [
        "format",
        "version",
        "model",
        "maps",
        "frame",
        "units",
        "matrix",
        "inverse",
        "parameters",
        "fixed",
        "moving",
        "software",
      ].sort(),
    );
    expect(r.format).toBe("coxa.transform");
    expect(r.version).toBe(1);
    expect(r.maps).toBe("fixed-to-moving");
    expect(r.frame).toBe("RAS");
    expect(r.units).toBe("mm");
    expect(r.matrix.length).toBe(4);
    expect(r.matrix[3]).toEqual([0, 0, 0, 1]);
    expectAllClose(flat(r.matrix), matrix, 0, "matrix");
    expectAllClose(
      multiply(new Float64Array(16), fromRows(r.inverse), matrix),
      identity(),
      1e-12,
      "inverse·matrix",
    );
    expect(r.parameters).toEqual(describeParameters("rigid", params, center));
    expect(r.fixed).toEqual({
      path: "fixed.nii.gz",
      sha256: "a".repeat(64),
      shape: [512, 512, 200],
      index_to_world: [
        [-0.8, 0, 0, 200],
        [0, -0.8, 0, 180],
        [0, 0, 2.5, -100],
        [0, 0, 0, 1],
      ],
    });
    expect(r.moving.sha256).toBe("b".repeat(64));
    expect(r.software).toEqual({ name: "coxa", version: softwareVersion() });
  });

  test("without parameters they are derived from the matrix", () => {
    const r = buildTransformRecord({
      model: "rigid",
      matrix,
      centerMm: center,
      fixed: fixedRef,
      moving: movingRef,
    });
    expectAllClose(r.parameters.rotation_deg, params.slice(0, 3), 1e-10, "rotation");
    expectAllClose(r.parameters.translation_mm, params.slice(3), 1e-10, "translation");
  });

  test("write -> read returns the same record and matrices, atomically (no temporary left)", () => {
    const p = join(dir, "transform.json");
    writeTransform(p, record());
    const loaded = readTransform(p);
    expect(loaded.record).toEqual(record());
    expectAllClose(loaded.matrix, matrix, 0, "matrix");
    expectAllClose(
      multiply(new Float64Array(16), loaded.inverse, loaded.matrix),
      identity(),
      1e-12,
      "inverse",
    );
    expect(readdirSync(dir).some((n) => n.startsWith(".coxa-tmp-"))).toBe(false);
  });

  test("writeTransform refuses an invalid record and leaves no file", () => {
    const bad = { ...record(), maps: "moving-to-fixed" } as unknown as TransformRecord;
    const p = join(dir, "never.json");
    expect(errorOf(() => writeTransform(p, bad)).code).toBe("BAD_TRANSFORM");
    expect(readdirSync(dir).includes("never.json")).toBe(false);
  });

  test("buildTransformRecord refuses a singular or non-affine matrix", () => {
    const singular = new Float64Array(16);
    singular[15] = 1;
    const build = (m: Mat4) => () =>
      buildTransformRecord({
        model: "rigid",
        matrix: m,
        centerMm: center,
        fixed: fixedRef,
        moving: movingRef,
      });
    expect(errorOf(build(singular)).code).toBe("BAD_TRANSFORM");
    const projective = identity();
    projective[12] = 0.1;
    expect(errorOf(build(projective)).message).toMatch(/last row/);
  });
});

describe("readTransform(path) validation", () => {
  const base = (): Record<string, unknown> => JSON.parse(JSON.stringify(record()));
  const mutate = (fn: (r: Record<string, unknown>) => void) => {
    const r = base();
    fn(r);
    return r;
  };
  const nudgedInverse = (mm: number) =>
    mutate((r) => {
      (r.inverse as number[][])[0][3] += mm;
    });
  const cases: [string, unknown, RegExp][] = [
    ["text that is not JSON", "{ not json", /is not valid JSON/],
    ["a JSON array", "[1, 2]", /not a JSON object/],
    ["a wrong format", mutate((r) => (r.format = "other.transform")), /format is "other\.transform"/],
    ["version 2", mutate((r) => (r.version = 2)), /version 2 is not supported/],
    ["an unknown model", mutate((r) => (r.model = "bspline")), /model is "bspline"/],
    ["maps the other way", mutate((r) => (r.maps = "moving-to-fixed")), /maps is "moving-to-fixed"/],
    ["another frame", mutate((r) => (r.frame = "LPS")), /frame is "LPS"/],
    ["other units", mutate((r) => (r.units = "cm")), /units is "cm"/],
    [
      "a 3-row matrix",
      mutate((r) => (r.matrix as unknown[]).pop()),
      /matrix must be 4 rows of 4 numbers, it has 3 rows/,
    ],
    [
      "a short matrix row",
      mutate((r) => (r.matrix as number[][])[1].pop()),
      /matrix row 1 must hold 4 numbers/,
    ],
    [
      "a non-numeric entry",
      mutate((r) => ((r.matrix as unknown[][])[2][1] = "x")),
      /matrix\[2\]\[1\] is not a finite number/,
    ],
    [
      "a null entry (NaN in JSON)",
      mutate((r) => ((r.matrix as unknown[][])[0][0] = null)),
      /matrix\[0\]\[0\] is not a finite number/,
    ],
    [
      "a last row not 0 0 0 1",
      mutate((r) => ((r.matrix as number[][])[3] = [0, 0, 0.5, 1])),
      /matrix last row is not 0 0 0 1/,
    ],
    [
      "a singular matrix",
      mutate(
        (r) =>
          (r.matrix = [
            [1, 0, 0, 0],
            [0, 1, 0, 0],
            [0, 0, 0, 0],
            [0, 0, 0, 1],
          ]),
      ),
      /matrix is singular/,
    ],
    ["an inverse 0.01 mm off", nudgedInverse(0.01), /inverse does not undo matrix/],
    ["a missing parameters block", mutate((r) => delete r.parameters), /"parameters" block is missing/],
    [
      "a short parameter",
      mutate((r) => ((r.parameters as Record<string, unknown>).scale = [1, 1])),
      /parameters\.scale must be 3 finite numbers/,
    ],
    [
      "a bad sha256",
      mutate((r) => ((r.fixed as Record<string, unknown>).sha256 = "abc")),
      /fixed\.sha256 is not a 64-digit hex/,
    ],
    [
      "a bad shape",
      mutate((r) => ((r.moving as Record<string, unknown>).shape = [0, 2, 3])),
      /moving\.shape must be 3 positive whole numbers/,
    ],
    ["a missing software block", mutate((r) => delete r.software), /"software" block/],
  ];
  for (const [what, content, pattern] of cases) {
    test(`refuses ${what} with BAD_TRANSFORM naming the file, in one line`, () => {
      const p = writeJson(content);
      const err = errorOf(() => readTransform(p));
      expect(err.code).toBe("BAD_TRANSFORM");
      expect(err.exitCode).toBe(2);
      expect(err.message.startsWith(`${p}: `)).toBe(true);
      expect(err.message).toMatch(pattern);
      expect(err.message).not.toContain("\n");
    });
  }

  test(`accepts an inverse within ${INVERSE_TOLERANCE_MM} mm (e.g. rounded by hand)`, () => {
    expect(() => readTransform(writeJson(nudgedInverse(1e-5)))).not.toThrow();
  });

  test("refuses a missing file and a directory", () => {
    expect(errorOf(() => readTransform(join(dir, "none.json"))).message).toMatch(
      /none\.json: transform file does not exist/,
    );
    const sub = join(dir, "a-dir");
    mkdirSync(sub);
    expect(errorOf(() => readTransform(sub)).message).toMatch(/is a directory/);
  });
});

describe("checkTransformImages / checkTransformImageFiles", () => {
  test("passes for the recorded hashes (any case) and names the image on a mismatch", () => {
    const r = record();
    expect(() =>
      checkTransformImages(
        r,
        {
          fixed: { path: "f.nii", sha256: "A".repeat(64) },
          moving: { path: "m.nii", sha256: "b".repeat(64) },
        },
        "t.json",
      ),
    ).not.toThrow();
    const err = errorOf(() =>
      checkTransformImages(r, { moving: { path: "other.nii", sha256: "c".repeat(64) } }, "t.json"),
    );
    expect(err.code).toBe("HASH_MISMATCH");
    expect(err.message).toMatch(
      /^other\.nii: sha256 cccccccccccc\.\.\. differs from bbbbbbbbbbbb\.\.\., the moving image recorded in t\.json$/,
    );
  });

  test("hashes real files (SHA-256 as node:crypto computes it)", async () => {
    const img = join(dir, "img.bin");
    writeFileSync(img, "not really an image");
    const digest = createHash("sha256").update("not really an image").digest("hex");
    const r = { ...record(), fixed: { ...fixedRef, sha256: digest } };
    await expect(checkTransformImageFiles(r, { fixedPath: img }, "t.json")).resolves.toBeUndefined();
    await expect(checkTransformImageFiles(r, { movingPath: img }, "t.json")).rejects.toMatchObject({
      code: "HASH_MISMATCH",
    });
    await expect(
      checkTransformImageFiles(r, { fixedPath: join(dir, "gone.bin") }, "t.json"),
    ).rejects.toMatchObject({
      code: "FILE_MISSING",
    });
  });
});

describe("transformHash(matrix)", () => {
  for (const c of ref.transform_hash.cases as { matrix: number[][]; sha256: string; note?: string }[]) {
    test(`equals Python's sha256(struct.pack('<16d', ...))${c.note ? ` (${c.note})` : ""}`, () => {
      const m = new Float64Array(flat(c.matrix));
      expect(transformHash(m)).toBe(c.sha256);
    });
  }

  test("differs when one entry changes by one unit in the last place", () => {
    const m = identity();
    const h = transformHash(m);
    m[3] = Number.MIN_VALUE;
    expect(transformHash(m)).not.toBe(h);
    m[3] = Number.NaN;
    expect(errorOf(() => transformHash(m)).code).toBe("BAD_TRANSFORM");
  });
});
