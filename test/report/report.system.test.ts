/**
 * The align report in a real browser: Debian's headless chromium renders the page without
 * console messages, and the screenshot shows every image panel with content (not blank).
 * Needs /usr/bin/chromium (Debian package chromium).
 */
import { readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { PNG } from "pngjs";
import { describe, expect, it } from "vitest";
import { renderAlignReport } from "../../src/report/align-report.js";
import { demoAlignInput } from "../../src/report/demo.js";
import { chromium, consoleLines, regionStats, screenshotReport, WIDTH } from "../helpers/chromium.js";
import { tempDir } from "../helpers/tmp.js";

describe("report.html in headless chromium", () => {
  const dir = tempDir("coxa-report-system-");

  it("the console check catches an uncaught error (control page)", async () => {
    const bad = join(dir, "control.html");
    writeFileSync(
      bad,
      "<!DOCTYPE html><html><body><p>x</p><script>notDefinedAnywhere()</script></body></html>",
    );
    const { stderr } = await chromium(["--dump-dom", `file://${bad}`]);
    expect(consoleLines(stderr).join("\n")).toMatch(/Uncaught ReferenceError/);
  });

  it("renders without console messages and every image panel in the screenshot has content", async () => {
    const html = renderAlignReport(demoAlignInput());
    const { geometry, png, console } = await screenshotReport(html, dir, "report");
    expect(geometry.panels.length).toBe(24);
    expect(console).toEqual([]);
    const height = png.height;
    expect(png.width).toBe(WIDTH);

    for (const [x, y, w, h, kind, plane] of geometry.panels) {
      expect(x + w, `${kind}/${plane} inside the screenshot`).toBeLessThanOrEqual(WIDTH);
      expect(y + h).toBeLessThanOrEqual(height);
      expect(w).toBeGreaterThan(100);
      const s = regionStats(png, x + 2, y + 2, w - 4, h - 4);
      expect(s.std, `${kind}/${plane} at ${x},${y} has contrast`).toBeGreaterThan(15);
      expect(s.paperShare, `${kind}/${plane} is not page background`).toBeLessThan(0.01);
      expect(s.frameShare, `${kind}/${plane} shows an image, not the empty frame`).toBeLessThan(0.05);
    }
    // Control: the page margin left of the panels is blank by the same measure.
    const first = geometry.panels[0];
    const margin = regionStats(png, 2, first[1], 20, first[3]);
    expect(margin.std).toBeLessThan(1);
    expect(margin.paperShare).toBeGreaterThan(0.99);

    // Control: the same page with the PNGs removed fails the panel check (the check can fail).
    const empty = join(dir, "empty.html");
    writeFileSync(empty, html.replace(/href="data:image\/png;base64,[^"]+"/g, 'href=""'));
    const emptyShot = join(dir, "empty.png");
    await chromium([`--window-size=${WIDTH},${height}`, `--screenshot=${emptyShot}`, `file://${empty}`]);
    const blank = PNG.sync.read(readFileSync(emptyShot));
    const [x, y, w, h] = geometry.panels[0];
    expect(regionStats(blank, x + 2, y + 2, w - 4, h - 4).frameShare).toBeGreaterThan(0.9);
  });
});
