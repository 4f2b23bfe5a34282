#!/usr/bin/env node
// Benchmark of the synthetic phantom: wall time per stage for the demo size and (with
// --clinical) the clinical size (CT 512 x 512 x 200, MR 384 x 384 x 60), generated in memory.
// Prints one JSON document. Needs `npm run build` first. Targets (from the phantom issue): demo in
// a few seconds, clinical well under two minutes on 2 cores.
//
//   node scripts/bench-phantom.mjs [--clinical] [--threads N]
import { availableParallelism } from "node:os";
import { generatePhantom } from "../dist/phantom/phantom.js";

const args = process.argv.slice(2);
const threadsAt = args.indexOf("--threads");
const threads = threadsAt >= 0 ? Number(args[threadsAt + 1]) : availableParallelism();
const sizes = args.includes("--clinical") ? ["demo", "clinical"] : ["demo"];
const result = {
  benchmark: "phantom",
  threads,
  cpus: availableParallelism(),
  node: process.version,
  runs: {},
};
for (const size of sizes) {
  const t0 = performance.now();
  const c = await generatePhantom({ seed: 1, size, threads });
  result.runs[size] = {
    seconds: Math.round(performance.now() - t0) / 1000,
    stages_s: c.timingS,
    ct_shape: c.truth.ct.shape,
    mr_shape: c.truth.mr.shape,
    ct_metal_slices: c.truth.ct_metal_slices,
    peak_rss_mb: Math.round(process.memoryUsage().rss / 1e6),
  };
}
process.stdout.write(`${JSON.stringify(result, null, 2)}\n`);
