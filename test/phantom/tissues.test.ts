import { describe, expect, test } from "vitest";
import { huToMu, MU_WATER_PER_MM, TISSUES } from "../../src/phantom/tissues.js";

describe("Hounsfield scale and tissue values", () => {
  test("huToMu follows the definition of the scale: air -1000 HU -> 0, water 0 HU -> mu_water", () => {
    // Definition of the Hounsfield scale: HU = 1000 (mu - mu_water) / mu_water.
    expect(huToMu(-1000)).toBe(0);
    expect(huToMu(0)).toBe(MU_WATER_PER_MM);
    expect(huToMu(1000)).toBeCloseTo(2 * MU_WATER_PER_MM, 15);
    expect(huToMu(-1024)).toBe(0);
    expect(TISSUES.air.hu).toBe(-1000);
  });

  test("tissue HU lie in the usual ranges (values from memory, no source)", () => {
    expect(TISSUES.fat.hu).toBeGreaterThanOrEqual(-120);
    expect(TISSUES.fat.hu).toBeLessThanOrEqual(-80);
    expect(TISSUES.muscle.hu).toBeGreaterThanOrEqual(35);
    expect(TISSUES.muscle.hu).toBeLessThanOrEqual(65);
    expect(TISSUES.fluid.hu).toBeGreaterThanOrEqual(0);
    expect(TISSUES.fluid.hu).toBeLessThanOrEqual(20);
    // Mean +- texture amplitude stays inside the stated ranges.
    expect(TISSUES.trabecular.hu - TISSUES.trabecular.huTexture).toBeGreaterThanOrEqual(200);
    expect(TISSUES.trabecular.hu + TISSUES.trabecular.huTexture).toBeLessThanOrEqual(400);
    expect(TISSUES.cortical.hu - TISSUES.cortical.huTexture).toBeGreaterThanOrEqual(1200);
    expect(TISSUES.cortical.hu + TISSUES.cortical.huTexture).toBeLessThanOrEqual(1800);
    expect(TISSUES.titanium.hu).toBe(3071);
  });

  test("MR contrast is not a monotonic function of HU (T1-like: fat bright, fluid dark, cortex black)", () => {
    const pairs: [keyof typeof TISSUES, keyof typeof TISSUES][] = [
      ["fat", "muscle"], // fat lower HU, brighter MR
      ["muscle", "fluid"], // muscle higher HU, brighter MR
      ["trabecular", "cortical"], // lower HU, brighter MR
      ["muscle", "trabecular"], // lower HU, darker MR
    ];
    const signs = pairs.map(([a, b]) =>
      Math.sign((TISSUES[a].hu - TISSUES[b].hu) * (TISSUES[a].mr - TISSUES[b].mr)),
    );
    expect(signs).toContain(1);
    expect(signs).toContain(-1);
    expect(TISSUES.fat.mr).toBeGreaterThan(TISSUES.muscle.mr);
    expect(TISSUES.muscle.mr).toBeGreaterThan(TISSUES.fluid.mr);
    expect(TISSUES.cortical.mr).toBeLessThan(0.1 * TISSUES.muscle.mr);
    expect(TISSUES.marrow.mr).toBeGreaterThan(TISSUES.muscle.mr);
  });
});
