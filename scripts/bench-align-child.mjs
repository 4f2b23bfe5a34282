#!/usr/bin/env node
// One `coxa align` run in its own process for the benchmark, so peak RSS belongs to that run.
// Usage: node scripts/bench-align-child.mjs '<AlignOptions JSON>'  -> prints one JSON line.
import { alignPair } from "../dist/register/align.js";

const options = JSON.parse(process.argv[2]);
const t0 = performance.now();
const r = await alignPair(options);
const wall = (performance.now() - t0) / 1000;
const s = r.summary;
console.log(
  JSON.stringify({
    wall_s: wall,
    verdict: s.verdict,
    tre_mean_mm: s.landmarks?.tre_mm.mean ?? null,
    tre_max_mm: s.landmarks?.tre_mm.max ?? null,
    inverse_consistency_mm: s.inverse_consistency_mm,
    timing_s: s.timing_s,
    peak_rss_mb: process.resourceUsage().maxRSS / 1024,
  }),
);
