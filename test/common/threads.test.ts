/**
 * Default thread count of an alignment (src/common/workers.ts): one thread below
 * PARALLEL_MIN_VOXELS, all cores from it on. The core count is Node's availableParallelism()
 * (the operating system's figure for this process).
 */
import { availableParallelism } from "node:os";
import { describe, expect, it } from "vitest";
import { defaultThreads, PARALLEL_MIN_VOXELS, threadsFor } from "../../src/common/workers.js";

describe("threadsFor", () => {
  it("gives one thread just below the size and every core from it on", () => {
    expect(PARALLEL_MIN_VOXELS).toBe(8_000_000);
    expect(threadsFor(PARALLEL_MIN_VOXELS - 1)).toBe(1);
    expect(threadsFor(160 * 160 * 96)).toBe(1); // the demo CT
    expect(threadsFor(PARALLEL_MIN_VOXELS)).toBe(Math.max(1, availableParallelism()));
    expect(threadsFor(512 * 512 * 200)).toBe(defaultThreads()); // a clinical CT
  });
});
