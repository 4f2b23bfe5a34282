#!/usr/bin/env node
// `npm run demo`: align the bundled synthetic MR to its CT (data-synthetic/) with `coxa align`,
// measuring landmark error and label overlap, and say where the report is. The data are an
// invented patient from an invented site; see data-synthetic/README.md.
import { spawnSync } from "node:child_process";
import { existsSync } from "node:fs";
import { dirname, join } from "node:path";
import { fileURLToPath } from "node:url";

const root = join(dirname(fileURLToPath(import.meta.url)), "..");
const bin = join(root, "dist", "cli", "main.js");
if (!existsSync(bin)) {
  console.error("coxa is not built yet: run `npm ci` (or `npm run build`) first");
  process.exit(1);
}
const d = (f) => join("data-synthetic", f);
const out = join("out", "demo");
const args = [
  bin,
  "align",
  "--fixed",
  d("ct.nii.gz"),
  "--moving",
  d("mr.nii.gz"),
  "--fixed-landmarks",
  d("landmarks-ct.csv"),
  "--moving-landmarks",
  d("landmarks-mr.csv"),
  "--fixed-labels",
  d("labels-ct.nii.gz"),
  "--moving-labels",
  d("labels-mr.nii.gz"),
  "--out",
  out,
  ...process.argv.slice(2),
];
console.log(`$ coxa ${args.slice(1).join(" ")}`);
const r = spawnSync(process.execPath, args, { cwd: root, stdio: "inherit" });
if (r.status === 0 || r.status === 3) {
  console.log(`\nOpen ${join(root, out, "report.html")} in a browser to see the alignment.`);
}
process.exit(r.status ?? 1);
