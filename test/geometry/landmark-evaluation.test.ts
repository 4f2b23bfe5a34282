// evaluateLandmarks: residuals against closed-form shifts, FRE against the Umeyama fit, FLE and
// predicted TRE against the Fitzpatrick-West-Maurer (1998) relations; the summary.json block
// against the keys design.md requires. Landmarks are invented.
import { describe, expect, test } from "vitest";
import { Rng } from "../../src/common/random.js";
import { evaluateLandmarks, landmarkEvaluationToJson } from "../../src/geometry/landmark-evaluation.js";
import { pairLandmarks } from "../../src/geometry/landmarks.js";
import { fitPointSets, predictedTre } from "../../src/geometry/pointset.js";
import { parametersToMatrix } from "../../src/geometry/transform-model.js";
import { expectAllClose } from "../helpers/close.js";

const labels = [
  "ASIS_L",
  "ASIS_R",
  "pubic_symphysis",
  "femoral_head_L",
  "femoral_head_R",
  "sacral_promontory",
];
const fixedPoints: [number, number, number][] = [
  [-110, 40, 10],
  [112, 38, 12],
  [0, 60, -60],
  [-85, 20, -45],
  [88, 22, -44],
  [0, -60, 40],
];
const shift = parametersToMatrix(new Float64Array(16), "rigid", [0, 0, 0, 1, 2, 2], [0, 0, 0]);

function pairsFor(moving: [number, number, number][]) {
  return pairLandmarks(
    labels.map((label, i) => ({ label, pointMm: fixedPoints[i] })),
    labels.map((label, i) => ({ label, pointMm: moving[i] })),
    "fixed.csv",
    "moving.csv",
  );
}

describe("evaluateLandmarks(matrix, pairs)", () => {
  test("a (1, 2, 2) mm shift against identical landmarks gives 3 mm at every point (closed form)", () => {
    const e = evaluateLandmarks(shift, pairsFor(fixedPoints));
    expectAllClose(e.errorsMm, new Array(6).fill(3), 1e-12, "error");
    expect(e.treMm.mean).toBeCloseTo(3, 12);
    expect(e.treMm.max).toBeCloseTo(3, 12);
    expect(e.treMm.median).toBeCloseTo(3, 12);
    // The landmarks agree rigidly, so the best rigid fit is exact: FRE 0, FLE 0, predicted 0.
    expect(e.freMm).toBeLessThan(1e-10);
    expect(e.fleSource).toBe("estimated");
    expect(e.predictedTreRmsMm).toBeLessThan(1e-9);
  });

  test("noisy moving landmarks: FRE of the rigid fit, FLE = FRE / sqrt(1 - 2/N), predicted TRE from it", () => {
    const rng = new Rng(4);
    const moving = fixedPoints.map((p) => p.map((v) => v + 0.8 * rng.normal()) as [number, number, number]);
    const pairs = pairsFor(moving);
    const e = evaluateLandmarks(shift, pairs);
    const fre = fitPointSets(pairs.fixedMm, pairs.movingMm).freMm;
    expect(e.freMm).toBeCloseTo(fre, 12);
    expect(e.fleMm).toBeCloseTo(fre / Math.sqrt(1 - 2 / 6), 12);
    expectAllClose(
      e.predictedTreMm as Float64Array,
      predictedTre(pairs.fixedMm, pairs.fixedMm, e.fleMm as number),
      1e-12,
      "TRE",
    );
    const given = evaluateLandmarks(shift, pairs, { fleMm: 1.5 });
    expect(given.fleMm).toBe(1.5);
    expect(given.fleSource).toBe("given");
  });

  test("two landmarks: errors only, with a note; collinear landmarks: errors only, with a note", () => {
    const two = pairLandmarks(
      [
        { label: "a", pointMm: [0, 0, 0] },
        { label: "b", pointMm: [10, 0, 0] },
      ],
      [
        { label: "a", pointMm: [1, 2, 2] },
        { label: "b", pointMm: [11, 2, 2] },
      ],
      "f.csv",
      "m.csv",
    );
    const e2 = evaluateLandmarks(shift, two);
    expectAllClose(e2.errorsMm, [0, 0], 1e-12, "error");
    expect(e2.freMm).toBeNull();
    expect(e2.predictedTreMm).toBeNull();
    expect(e2.note).toMatch(/at least 3/);
    const line = pairLandmarks(
      ["a", "b", "c"].map((label, i) => ({ label, pointMm: [i * 10, 0, 0] as [number, number, number] })),
      ["a", "b", "c"].map((label, i) => ({ label, pointMm: [i * 10, 0, 0] as [number, number, number] })),
      "f.csv",
      "m.csv",
    );
    expect(evaluateLandmarks(shift, line).note).toMatch(/one line/);
  });
});

describe("landmarkEvaluationToJson(evaluation)", () => {
  test("has the summary.json keys of design.md, snake_case, per point with label and error_mm", () => {
    const json = landmarkEvaluationToJson(evaluateLandmarks(shift, pairsFor(fixedPoints)));
    expect(json.count).toBe(6);
    expect(json.tre_mm.mean).toBeCloseTo(3, 12);
    expect(json.tre_mm.max).toBeCloseTo(3, 12);
    expect(json.per_point.map((p) => p.label)).toEqual(labels);
    expect(json.per_point[0].error_mm).toBeCloseTo(3, 12);
    expect(typeof json.fre_mm).toBe("number");
    expect(typeof json.predicted_tre_mm).toBe("number");
    expect(JSON.parse(JSON.stringify(json))).toEqual(json);
  });
});
