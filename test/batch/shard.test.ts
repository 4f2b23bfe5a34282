/** Shards: K/N parsing, selection (a partition of the cases) and the array-task variables. */
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { parseShard, selectShard, shardFromEnvironment } from "../../src/batch/shard.js";

describe("parseShard", () => {
  it("reads K/N and auto; refuses K outside 1..N and other text", () => {
    expect(parseShard("1/2")).toEqual({ index: 1, count: 2 });
    expect(parseShard(" 3 / 7 ")).toEqual({ index: 3, count: 7 });
    expect(parseShard("AUTO")).toBe("auto");
    for (const bad of ["0/2", "3/2", "1/0", "1-2", "a/b", "", "1/2/3", "-1/2"]) {
      expect(() => parseShard(bad), bad).toThrow(/is not K\/N|needs 1 <= K <= N/);
    }
  });
});

describe("selectShard", () => {
  it("shard K of N takes every N-th case starting at the K-th (1/2 and 2/2 of 5 cases)", () => {
    const cases = ["a", "b", "c", "d", "e"];
    expect(selectShard(cases, { index: 1, count: 2 })).toEqual(["a", "c", "e"]);
    expect(selectShard(cases, { index: 2, count: 2 })).toEqual(["b", "d"]);
    expect(selectShard(cases, { index: 3, count: 3 })).toEqual(["c"]);
    expect(selectShard(cases, { index: 4, count: 9 })).toEqual(["d"]);
    expect(selectShard(cases, undefined)).toEqual(cases);
  });

  it("the N shards cover every case exactly once, in manifest order within a shard (property)", () => {
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 60 }), fc.integer({ min: 1, max: 12 }), (n, count) => {
        const cases = Array.from({ length: n }, (_, i) => i);
        const seen = new Array<number>(n).fill(0);
        for (let k = 1; k <= count; k++) {
          const part = selectShard(cases, { index: k, count });
          for (let t = 1; t < part.length; t++) expect(part[t]).toBeGreaterThan(part[t - 1]);
          for (const c of part) seen[c]++;
          expect(part.length).toBe(Math.floor(n / count) + (k <= n % count ? 1 : 0));
        }
        expect(seen.every((s) => s === 1)).toBe(true);
      }),
    );
  });
});

describe("shardFromEnvironment", () => {
  it("--array=1-2 (ids 1 and 2) and --array=0-1 both give shards 1/2 and 2/2", () => {
    // Slurm's sbatch documentation: SLURM_ARRAY_TASK_ID/COUNT/MIN/MAX/STEP are set for array tasks.
    expect(
      shardFromEnvironment({
        SLURM_ARRAY_TASK_ID: "1",
        SLURM_ARRAY_TASK_COUNT: "2",
        SLURM_ARRAY_TASK_MIN: "1",
        SLURM_ARRAY_TASK_MAX: "2",
      }),
    ).toEqual({ index: 1, count: 2 });
    expect(
      shardFromEnvironment({
        SLURM_ARRAY_TASK_ID: "2",
        SLURM_ARRAY_TASK_COUNT: "2",
        SLURM_ARRAY_TASK_MIN: "1",
        SLURM_ARRAY_TASK_MAX: "2",
      }),
    ).toEqual({ index: 2, count: 2 });
    expect(
      shardFromEnvironment({
        SLURM_ARRAY_TASK_ID: "0",
        SLURM_ARRAY_TASK_COUNT: "2",
        SLURM_ARRAY_TASK_MIN: "0",
      }),
    ).toEqual({ index: 1, count: 2 });
    expect(shardFromEnvironment({ SLURM_ARRAY_TASK_ID: "1", SLURM_ARRAY_TASK_COUNT: "2" })).toEqual({
      index: 2,
      count: 2,
    });
  });

  it("MIN/MAX without COUNT, and a step (--array=10-20:5 -> ids 10, 15, 20)", () => {
    expect(
      shardFromEnvironment({
        SLURM_ARRAY_TASK_ID: "7",
        SLURM_ARRAY_TASK_MIN: "5",
        SLURM_ARRAY_TASK_MAX: "8",
      }),
    ).toEqual({ index: 3, count: 4 });
    const env = { SLURM_ARRAY_TASK_MIN: "10", SLURM_ARRAY_TASK_MAX: "20", SLURM_ARRAY_TASK_STEP: "5" };
    expect(shardFromEnvironment({ ...env, SLURM_ARRAY_TASK_ID: "15" })).toEqual({ index: 2, count: 3 });
    expect(shardFromEnvironment({ ...env, SLURM_ARRAY_TASK_ID: "20", SLURM_ARRAY_TASK_COUNT: "3" })).toEqual({
      index: 3,
      count: 3,
    });
  });

  it("clear errors: not an array task, no count, ids outside a regular range, junk values", () => {
    expect(() => shardFromEnvironment({})).toThrow(/needs SLURM_ARRAY_TASK_ID .* not a cluster array task/);
    expect(() => shardFromEnvironment({ SLURM_ARRAY_TASK_ID: "3" })).toThrow(
      /needs SLURM_ARRAY_TASK_COUNT or SLURM_ARRAY_TASK_MAX/,
    );
    // --array=1,4,9: COUNT 3, MIN 1, ID 9 does not fit 1..3.
    expect(() =>
      shardFromEnvironment({
        SLURM_ARRAY_TASK_ID: "9",
        SLURM_ARRAY_TASK_COUNT: "3",
        SLURM_ARRAY_TASK_MIN: "1",
      }),
    ).toThrow(/does not fit a range of 3 tasks/);
    expect(() => shardFromEnvironment({ SLURM_ARRAY_TASK_ID: "x1", SLURM_ARRAY_TASK_COUNT: "2" })).toThrow(
      /is not a whole number/,
    );
  });
});
