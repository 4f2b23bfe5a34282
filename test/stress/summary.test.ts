/**
 * Stress summaries and stress.csv. External checks: the column list fixed by the issue
 * (`severity,trial,offset_mm,offset_deg,mask,error_mm,success,seconds,verdict`), the common
 * definition of the median (middle value, or the mean of the two middle values), and the
 * issue's conclusion rule (largest severity at which >= 95% of trials succeed, per mode) on
 * hand-made rows.
 */
import { describe, expect, it } from "vitest";
import {
  CSV_HEADER,
  concludeStress,
  type MaskMode,
  median,
  modeStats,
  type StressRow,
  stressCsv,
  trialFileName,
} from "../../src/stress/summary.js";

function row(severity: number, trial: number, mask: MaskMode, error: number, successMm = 2): StressRow {
  return {
    severity,
    trial,
    offset_mm: 12.3456,
    offset_deg: 4.5,
    mask,
    error_mm: error,
    success: error <= successMm ? 1 : 0,
    seconds: 3.14659,
    verdict: error <= successMm ? "pass" : "review",
    start_error_mm: 15,
    start_fixed_to_moving: [],
    reasons: [],
    transform: trialFileName(severity, trial, mask),
    failure: null,
  };
}

describe("median", () => {
  it("is the middle value or the mean of the two middle values", () => {
    expect(median([3, 1, 2])).toBe(2);
    expect(median([4, 1, 3, 2])).toBe(2.5);
    expect(median([7])).toBe(7);
    expect(median([])).toBeNull();
  });
});

describe("modeStats", () => {
  it("counts successes, verdicts and error statistics of one severity and mode", () => {
    const rows = [
      row(0.5, 1, "on", 0.5),
      row(0.5, 1, "off", 5),
      row(0.5, 2, "on", 1.5),
      row(0.5, 2, "off", 0.2),
      row(1, 1, "on", 9),
    ];
    const on = modeStats(rows, 0.5, "on");
    expect(on).toMatchObject({
      trials: 2,
      successes: 2,
      success_rate: 1,
      median_error_mm: 1,
      max_error_mm: 1.5,
    });
    const off = modeStats(rows, 0.5, "off");
    expect(off.success_rate).toBe(0.5);
    expect(off.verdicts).toEqual({ pass: 1, review: 1, fail: 0 });
    expect(modeStats(rows, 0.25, "on")).toMatchObject({ trials: 0, success_rate: 0, median_error_mm: null });
  });
});

describe("concludeStress", () => {
  const stat = (rate: number) => ({
    trials: 20,
    successes: Math.round(rate * 20),
    success_rate: rate,
    median_error_mm: 0.5,
    max_error_mm: 1,
    verdicts: { pass: 20, review: 0, fail: 0 },
  });

  it("reports per mode the largest severity with at least 95% success", () => {
    const c = concludeStress(
      [0, 0.5, 1],
      [
        { on: stat(1), off: stat(1) },
        { on: stat(0.95), off: stat(0.9) },
        { on: stat(0.95), off: stat(0.5) },
      ],
      2,
    );
    expect(c.largest_severity).toEqual({ on: 1, off: 0 });
    expect(c.text).toContain("metal mask on: up to severity 1;");
    expect(c.text).toContain("metal mask off: up to severity 0.");
    expect(c.text).toContain("at least 95% of trials came within 2 mm");
  });

  it("names lower severities that fell short, and says when no severity reached 95%", () => {
    const c = concludeStress(
      [0, 0.5, 1],
      [
        { on: stat(1), off: stat(0.5) },
        { on: stat(0.9), off: stat(0.6) },
        { on: stat(1), off: stat(0.94) },
      ],
      2,
    );
    expect(c.largest_severity).toEqual({ on: 1, off: null });
    expect(c.shortfalls_below.on).toEqual([0.5]);
    expect(c.text).toContain("up to severity 1 (but not at 0.5)");
    expect(c.text).toContain("metal mask off: at no tested severity");
  });
});

describe("stressCsv", () => {
  it("has exactly the issue's columns and one row per trial and mode", () => {
    const text = stressCsv([row(0, 1, "on", 0.12345), row(0, 1, "off", 3)]);
    const lines = text.split("\n");
    expect(lines[0]).toBe("severity,trial,offset_mm,offset_deg,mask,error_mm,success,seconds,verdict");
    expect(CSV_HEADER).toBe(lines[0]);
    expect(lines[1]).toBe("0,1,12.346,4.500,on,0.1235,1,3.15,pass");
    expect(lines[2]).toBe("0,1,12.346,4.500,off,3.0000,0,3.15,review");
    expect(lines[3]).toBe("");
    expect(lines).toHaveLength(4);
  });

  it("names trial files by severity, trial and mode", () => {
    expect(trialFileName(0.25, 3, "off")).toBe("trials/0.25-3-off.json");
    expect(trialFileName(1, 10, "on")).toBe("trials/1-10-on.json");
  });
});
