#!/usr/bin/env node
// Preview of the align report on invented demo data (src/report/demo.ts), or on the demo pair in
// a CT/MR pair in a directory (ct.nii.gz + mr.nii.gz, e.g. data-synthetic/), the MR resampled onto
// the CT grid with src/resample and the identity or a given coxa transform. Run after `npm run build`:
//   node scripts/report-preview.mjs [--out out/report-preview] [--data DIR [--transform T.json]]
//     [--dims 112,84,60] [--spacing 3,3,4] [--verdict pass|review|fail]
//     [--screenshot] [--width 1400] [--height 9000]
// Prints the report path, its size in bytes and the render time (noisy on a shared machine).
import { execFileSync } from "node:child_process";
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join, resolve } from "node:path";
import { parseArgs } from "node:util";

const { values } = parseArgs({
  options: {
    out: { type: "string", default: "out/report-preview" },
    data: { type: "string" },
    transform: { type: "string" },
    dims: { type: "string" },
    spacing: { type: "string" },
    verdict: { type: "string", default: "review" },
    screenshot: { type: "boolean", default: false },
    width: { type: "string", default: "1400" },
    height: { type: "string", default: "9000" },
  },
});

const dist = new URL("../dist/", import.meta.url);
const { demoAlignInput } = await import(new URL("report/demo.js", dist).href);
const { writeAlignReport } = await import(new URL("report/align-report.js", dist).href);

const list = (s) => s.split(",").map(Number);
let input = demoAlignInput({
  ...(values.dims ? { dims: list(values.dims) } : {}),
  ...(values.spacing ? { spacingMm: list(values.spacing) } : {}),
  verdict: values.verdict,
});

if (values.data) {
  const { readNifti } = await import(new URL("image/nifti-read.js", dist).href);
  const { detectModality } = await import(new URL("image/modality.js", dist).href);
  const { sha256File } = await import(new URL("common/hash.js", dist).href);
  const ctPath = join(values.data, "ct.nii.gz");
  const mrPath = join(values.data, "mr.nii.gz");
  const ct = readNifti(ctPath).volume;
  const mr = readNifti(mrPath).volume;
  // MR onto the CT grid with src/resample (trilinear); identity unless --transform T.json is given.
  const { resampleOntoSync } = await import(new URL("resample/resample.js", dist).href);
  const { fromRows, identity } = await import(new URL("geometry/mat4.js", dist).href);
  const transform = values.transform ? JSON.parse(readFileSync(values.transform, "utf8")) : undefined;
  const fixedToMoving = transform ? fromRows(transform.matrix) : identity();
  const onCt = resampleOntoSync(mr, ct, fixedToMoving, { interp: "linear" }).volume;
  const mask = new Uint8Array(ct.count);
  for (let p = 0; p < ct.count; p++) mask[p] = ct.data[p] >= 2500 ? 1 : 0;
  const ctMod = detectModality(ct.data);
  const mrMod = detectModality(mr.data);
  input = {
    ...input,
    title: `coxa alignment report (preview on ${values.data}, ${transform ? values.transform : "identity transform"})`,
    landmarks: undefined,
    dice: undefined,
    fixed: {
      volume: ct,
      path: ctPath,
      sha256: await sha256File(ctPath),
      modality: ctMod.modality,
      modalityReason: ctMod.reason,
    },
    movingInfo: {
      path: mrPath,
      sha256: await sha256File(mrPath),
      shape: [...mr.dims],
      spacingMm: mr.spacingMm,
      orientation: mr.orientation(),
      datatype: mr.datatype,
      modality: mrMod.modality,
      modalityReason: mrMod.reason,
    },
    movingOnFixed: onCt,
    metalMask: mask,
  };
}

mkdirSync(values.out, { recursive: true });
const path = resolve(values.out, "report.html");
const t0 = performance.now();
const bytes = writeAlignReport(path, input);
const seconds = (performance.now() - t0) / 1000;
const result = { report: path, bytes, render_s: Number(seconds.toFixed(3)) };

if (values.screenshot) {
  const profile = mkdtempSync(join(tmpdir(), "coxa-chromium-"));
  const png = resolve(values.out, "report.png");
  try {
    execFileSync(
      "/usr/bin/chromium",
      [
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
        `--user-data-dir=${profile}`,
        `--window-size=${values.width},${values.height}`,
        `--screenshot=${png}`,
        `file://${path}`,
      ],
      { stdio: "ignore", timeout: 120_000 },
    );
    if (existsSync(png)) result.screenshot = png;
  } finally {
    rmSync(profile, { recursive: true, force: true });
  }
}
process.stdout.write(`${JSON.stringify(result)}\n`);
