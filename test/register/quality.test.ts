/**
 * judgeRegistration: each gate at its threshold. Thresholds are common practice for rigid
 * CT-MR alignment (no source) and documented in src/register/quality.ts.
 */
import { describe, expect, it } from "vitest";
import { identity } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { DEFAULT_THRESHOLDS, judgeRegistration, type QualityInput } from "../../src/register/quality.js";

const good: QualityInput = {
  model: "rigid",
  matrix: identity(),
  scale: [1, 1, 1],
  overlapFraction: 0.9,
  metricStart: 0.4,
  metricFinal: 0.7,
  converged: true,
  convergenceReason: "tolerance met",
  inverseConsistencyMm: 0.3,
  treMeanMm: 0.4,
  treMaxMm: 0.9,
};

describe("judgeRegistration", () => {
  it("passes a good result and lists every gate's finding", () => {
    const r = judgeRegistration(good);
    expect(r.verdict).toBe("pass");
    expect(r.gates.map((g) => g.name)).toEqual([
      "landmarks",
      "overlap",
      "metric",
      "convergence",
      "plausibility",
      "inverse consistency",
    ]);
    expect(r.reasons.length).toBe(6);
  });

  it("landmark TRE: <= 2 mm pass, <= 4 mm review, above fails; thresholds are options", () => {
    expect(judgeRegistration({ ...good, treMeanMm: 2 }).verdict).toBe("pass");
    expect(judgeRegistration({ ...good, treMeanMm: 2.01 }).verdict).toBe("review");
    expect(judgeRegistration({ ...good, treMeanMm: 4 }).verdict).toBe("review");
    const f = judgeRegistration({ ...good, treMeanMm: 4.01 });
    expect(f.verdict).toBe("fail");
    expect(f.reasons[0]).toMatch(/4\.01 mm.*above 4 mm/);
    expect(judgeRegistration({ ...good, treMeanMm: 3 }, { trePassMm: 3 }).verdict).toBe("pass");
  });

  it("inverse consistency above 1 mm needs review; overlap below 0.5 review, below 0.25 fail", () => {
    expect(judgeRegistration({ ...good, inverseConsistencyMm: 1.2 }).verdict).toBe("review");
    expect(judgeRegistration({ ...good, overlapFraction: 0.4 }).verdict).toBe("review");
    expect(judgeRegistration({ ...good, overlapFraction: 0.2 }).verdict).toBe("fail");
  });

  it("no metric gain or no convergence needs review", () => {
    expect(judgeRegistration({ ...good, metricFinal: 0.4 }).verdict).toBe("review");
    const r = judgeRegistration({ ...good, converged: false, convergenceReason: "budget used" });
    expect(r.verdict).toBe("review");
    expect(r.reasons[0]).toMatch(/budget used/);
  });

  it("implausible rotation (> 45 degrees) or scale outside 0.8-1.25 fails", () => {
    const rot = rigidMatrix([0, 0, 0], [0, 0, 50], [0, 0, 0]);
    expect(judgeRegistration({ ...good, matrix: rot }).verdict).toBe("fail");
    expect(
      judgeRegistration({ ...good, matrix: rigidMatrix([0, 0, 0], [0, 0, 44], [0, 0, 0]) }).verdict,
    ).toBe("pass");
    expect(judgeRegistration({ ...good, model: "similarity", scale: [1.3, 1.3, 1.3] }).verdict).toBe("fail");
    expect(DEFAULT_THRESHOLDS.maxScale).toBe(1.25);
  });

  it("a distant runner-up of nearly the same cost needs review (ambiguous search)", () => {
    const r = judgeRegistration({ ...good, runnerUpGap: 0.01, runnerUpDistanceMm: 80, bestSearchCost: -0.9 });
    expect(r.verdict).toBe("review");
    expect(r.reasons[0]).toMatch(/80 mm away/);
    expect(
      judgeRegistration({ ...good, runnerUpGap: 0.3, runnerUpDistanceMm: 80, bestSearchCost: -0.9 }).verdict,
    ).toBe("pass");
  });
});
