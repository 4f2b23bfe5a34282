#!/usr/bin/env node
// Regenerates data-synthetic/: the committed demo case of the synthetic phantom (seed 1, demo size,
// right hip implant, severity 1, default pose, full MR field of view) and its preview.png.
// The output is byte-identical on every run (seeded generator, fixed gzip level, no timestamps).
// README.md in that folder is written by hand and left alone. Needs `npm run build` first.
//
//   node scripts/make-demo-data.mjs            rewrite data-synthetic/
//   node scripts/make-demo-data.mjs --check    regenerate into a temporary folder and compare
//                                              byte for byte (exit 1 on any difference)
import { createHash } from "node:crypto";
import { mkdtempSync, readFileSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { PHANTOM_FILES, writePhantomCase } from "../dist/phantom/phantom.js";
import { writePreview } from "./phantom-previews.mjs";

export const DEMO_OPTIONS = {
  seed: 1,
  size: "demo",
  implant: "right",
  severity: 1,
  mrFov: "full",
  gzipLevel: 9,
};
const root = fileURLToPath(new URL("..", import.meta.url));
const target = join(root, "data-synthetic");
const files = [...PHANTOM_FILES, "preview.png"];

async function build(dir) {
  await writePhantomCase({ ...DEMO_OPTIONS, outDir: dir, force: true });
  writePreview(dir, join(dir, "preview.png"));
}

const sha = (path) => createHash("sha256").update(readFileSync(path)).digest("hex");

if (process.argv.includes("--check")) {
  const tmp = mkdtempSync(join(tmpdir(), "coxa-demo-"));
  try {
    await build(tmp);
    const bad = files.filter((f) => sha(join(tmp, f)) !== sha(join(target, f)));
    if (bad.length > 0) {
      process.stderr.write(`data-synthetic differs from a fresh regeneration: ${bad.join(", ")}\n`);
      process.exitCode = 1;
    } else {
      process.stdout.write(
        `data-synthetic is byte-identical to a fresh regeneration (${files.length} files)\n`,
      );
    }
  } finally {
    rmSync(tmp, { recursive: true, force: true });
  }
} else {
  await build(target);
  for (const f of files) process.stdout.write(`${sha(join(target, f))}  data-synthetic/${f}\n`);
}
