import { readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
import { PNG } from "pngjs";
import { describe, expect, it } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Volume } from "../../src/image/volume.js";
import { type AlignReportInput, renderAlignReport, writeAlignReport } from "../../src/report/align-report.js";
import { demoAlignInput } from "../../src/report/demo.js";
import { formatNumber } from "../../src/report/html.js";
import { tempDir } from "../helpers/tmp.js";

// Invented demo data (src/report/demo.ts) on a coarse grid so the tests stay fast.
const small = (): AlignReportInput => demoAlignInput({ dims: [56, 42, 30], spacingMm: [6, 6, 8] });

describe("renderAlignReport", () => {
  const input = small();
  const page = renderAlignReport(input);

  it("returns one complete HTML document that loads nothing from outside", () => {
    expect(page.startsWith("<!DOCTYPE html>")).toBe(true);
    expect(page.trimEnd().endsWith("</html>")).toBe(true);
    expect(page).not.toMatch(/<script|<link|<iframe|@import|url\(/i);
    expect(page).not.toMatch(/\ssrc="/);
    // Every href is an in-page anchor or an embedded PNG.
    for (const m of page.matchAll(/href="([^"]*)"/g))
      expect(m[1]).toMatch(/^(#[a-z-]+|data:image\/png;base64,)/);
    expect(page).toContain("default-src 'none'; img-src data:");
  });

  it("shows the sections in the agreed order, verdict and reasons first", () => {
    const ids = [
      "verdict",
      "care",
      "inputs",
      "transform",
      "images",
      "trace",
      "landmarks",
      "dice",
      "quality",
      "timings",
      "software",
    ];
    const at = ids.map((id) => page.indexOf(`id="${id}"`));
    for (let i = 0; i < ids.length; i++) expect(at[i], ids[i]).toBeGreaterThan(0);
    for (let i = 1; i < ids.length; i++)
      expect(at[i], `${ids[i - 1]} before ${ids[i]}`).toBeGreaterThan(at[i - 1]);
    expect(page).toContain("Alignment: REVIEW");
    for (const r of input.reasons) expect(page).toContain(r);
    expect(page).toContain("research software, not a medical device");
    expect(page).toContain("reviewed by a qualified person");
    expect(page).toContain("local regulations and licensed practice");
  });

  it("has 2 points x 3 planes x 4 panels, each a decodable PNG no larger than the panel limit", () => {
    const figures = [
      ...page.matchAll(
        /<figure class="panel" data-kind="(\w+)" data-plane="(\w+)"><svg [^>]*width="(\d+)" height="(\d+)"[^>]*><image href="data:image\/png;base64,([^"]+)"/g,
      ),
    ];
    expect(figures.length).toBe(24);
    expect(figures.slice(0, 4).map((f) => f[1])).toEqual(["fixed", "moving", "checkerboard", "edges"]);
    expect(figures.filter((f) => f[2] === "sagittal").length).toBe(8);
    for (const f of figures) {
      const png = PNG.sync.read(Buffer.from(f[5], "base64"));
      expect([png.width, png.height]).toEqual([Number(f[3]), Number(f[4])]);
      expect(Math.max(png.width, png.height)).toBe(288);
    }
    expect(page).toContain('data-point="implant"');
    expect(page).toContain('data-point="otherHip"');
    expect(page).toContain("patient&#39;s right on the image left");
  });

  it("lists inputs with hashes, which image looked like CT, the transform and the numbers given", () => {
    expect(page).toContain(input.fixed.sha256);
    expect(page).toContain(input.movingInfo.sha256);
    expect(page).toContain("The fixed image looked like CT");
    expect(page).toContain("56 \u00d7 42 \u00d7 30");
    expect(page).toContain("6.000 \u00d7 6.000 \u00d7 8.000");
    expect(page).toContain("<td>1.500000</td>"); // matrix entry tx
    expect(page).toContain("\u22121.000000"); // ty with a real minus sign
    for (const lm of input.landmarks!) {
      const row = page.match(
        new RegExp(`<tr[^>]*><td>${lm.label}</td><td class="num">([^<]+)</td><td class="num">([^<]+)</td>`),
      );
      expect(row, lm.label).not.toBeNull();
      expect(row![1]).toContain(formatNumber(lm.errorMm, 2));
      expect(row![2]).toBe(formatNumber(lm.predictedTreMm!, 2));
    }
    expect(page).toContain('<td>left femur</td><td class="num">0.910</td>');
    expect(page).toContain("97.0 %");
    expect(page).toMatch(/<td>total<\/td><td class="num">4.36<\/td>/);
    expect(page).toMatch(/coxa \d+\.\d+\.\d+/);
  });

  it("escapes text from the inputs", () => {
    const evil = small();
    evil.fixed.path = 'a<b>"c".nii';
    evil.reasons = ["<img src=x>"];
    const html = renderAlignReport(evil);
    expect(html).toContain("a&lt;b&gt;&quot;c&quot;.nii");
    expect(html).not.toContain("<img src=x>");
  });

  it("labels the columns by modality when the CT is the moving image", () => {
    const swapped = small();
    swapped.fixed = { ...swapped.fixed, modality: "mr", modalityReason: "declared MR" };
    swapped.movingInfo = { ...swapped.movingInfo, modality: "ct", modalityReason: "air and fat values" };
    swapped.metalMask = undefined;
    const html = renderAlignReport(swapped);
    expect(html).toContain("MR (fixed)");
    expect(html).toContain("CT on the MR grid");
    expect(html).toContain("MR edges over CT");
    expect(html).toContain("The moving image looked like CT");
    // No metal mask and no given points: slices go through the body centre only.
    expect(html).toContain('data-point="centre"');
    expect([...html.matchAll(/<figure class="panel"/g)].length).toBe(12);
  });

  it("refuses a bad verdict, a bad matrix and a resampled image off the fixed grid with BAD_ARGUMENT", () => {
    const bad = small();
    expect(() => renderAlignReport({ ...bad, verdict: "maybe" as never })).toThrowError(CoxaError);
    expect(() =>
      renderAlignReport({ ...bad, transform: { ...bad.transform, matrix: [[1, 0, 0]] } }),
    ).toThrowError(/matrix/);
    const off = new Volume([56, 42, 29], new Float32Array(56 * 42 * 29), bad.fixed.volume.indexToWorld);
    try {
      renderAlignReport({ ...bad, movingOnFixed: off });
      expect.fail("expected an error");
    } catch (err) {
      expect((err as CoxaError).code).toBe("BAD_ARGUMENT");
    }
  });
});

describe("writeAlignReport", () => {
  it("writes the rendered page atomically and leaves no temporary file", () => {
    const dir = tempDir();
    const path = join(dir, "report.html");
    const input = small();
    const bytes = writeAlignReport(path, input);
    const text = readFileSync(path, "utf8");
    expect(Buffer.byteLength(text)).toBe(bytes);
    expect(text).toBe(renderAlignReport(input));
    expect(readdirSync(dir)).toEqual(["report.html"]);
  });
});
