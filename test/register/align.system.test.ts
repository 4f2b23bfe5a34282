/**
 * `coxa align` outputs read by independent tools (system suite):
 *  - nibabel 5 (Debian python3-nibabel) reads moving-on-fixed.nii.gz with the fixed image's
 *    affine and shape;
 *  - the report renders in Debian's headless chromium without console messages, and every
 *    image panel of the screenshot has content.
 */
import { execFileSync } from "node:child_process";
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { regionStats, screenshotReport } from "../helpers/chromium.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const DATA = join(import.meta.dirname, "..", "..", "data-synthetic");
const dir = tempDir();
const out = join(dir, "align");

beforeAll(async () => {
  const r = await runCoxa([
    "align",
    "--fixed",
    join(DATA, "ct.nii.gz"),
    "--moving",
    join(DATA, "mr.nii.gz"),
    "--fixed-landmarks",
    join(DATA, "landmarks-ct.csv"),
    "--moving-landmarks",
    join(DATA, "landmarks-mr.csv"),
    "--out",
    out,
    "--quiet",
  ]);
  expect(r.code, r.stderr).toBe(0);
}, 300_000);

describe("coxa align outputs in independent tools", () => {
  it("nibabel reads moving-on-fixed.nii.gz with the CT's affine (1e-4 mm) and shape", () => {
    const py = `
import json, sys, nibabel as nib
a = nib.load(sys.argv[1]); b = nib.load(sys.argv[2])
print(json.dumps({"shape": [list(a.shape), list(b.shape)], "affine": [a.affine.tolist(), b.affine.tolist()]}))`;
    const r = JSON.parse(
      execFileSync(
        "/usr/bin/python3",
        ["-c", py, join(out, "moving-on-fixed.nii.gz"), join(DATA, "ct.nii.gz")],
        { encoding: "utf8" },
      ),
    );
    expect(r.shape[0]).toEqual(r.shape[1]);
    for (let i = 0; i < 4; i++)
      for (let j = 0; j < 4; j++) expect(Math.abs(r.affine[0][i][j] - r.affine[1][i][j])).toBeLessThan(1e-4);
  });

  it("report.html renders without console messages; all 24 image panels have content", async () => {
    const html = readFileSync(join(out, "report.html"), "utf8");
    const { geometry, png, console, shot } = await screenshotReport(html, dir, "align-report");
    expect(console).toEqual([]);
    expect(geometry.panels.length).toBe(24);
    for (const [x, y, w, h, kind, plane] of geometry.panels) {
      expect(x + w, `${kind}/${plane} inside the page width`).toBeLessThanOrEqual(png.width);
      const s = regionStats(png, x + 2, y + 2, w - 4, h - 4);
      expect(s.std, `${kind}/${plane} has contrast`).toBeGreaterThan(15);
      expect(s.paperShare, `${kind}/${plane} is not page background`).toBeLessThan(0.01);
    }
    expect(shot).toMatch(/\.png$/);
  });
});
