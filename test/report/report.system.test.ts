/**
 * The align report in a real browser: Debian's headless chromium renders the page without
 * console messages, and the screenshot shows every image panel with content (not blank).
 * Needs /usr/bin/chromium (Debian package chromium).
 */
import { execFile } from "node:child_process";
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { PNG } from "pngjs";
import { describe, expect, it } from "vitest";
import { renderAlignReport } from "../../src/report/align-report.js";
import { demoAlignInput } from "../../src/report/demo.js";
import { tempDir } from "../helpers/tmp.js";

const CHROMIUM = "/usr/bin/chromium";
const WIDTH = 1400;

function chromium(args: string[]): Promise<{ stdout: string; stderr: string }> {
  const profile = mkdtempSync(join(tmpdir(), "coxa-chromium-"));
  const flags = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--hide-scrollbars",
    "--force-device-scale-factor=1",
    "--enable-logging=stderr",
    "--v=0",
    `--user-data-dir=${profile}`,
  ];
  return new Promise((resolve, reject) => {
    execFile(
      CHROMIUM,
      [...flags, ...args],
      { timeout: 180_000, maxBuffer: 256 * 1024 * 1024 },
      (err, stdout, stderr) => {
        rmSync(profile, { recursive: true, force: true });
        if (err) reject(new Error(`chromium failed: ${err.message}\n${stderr}`));
        else resolve({ stdout, stderr });
      },
    );
  });
}

/** Console output of the page (messages, uncaught errors, CSP refusals) from chromium's log. */
function consoleLines(stderr: string): string[] {
  return stderr.split("\n").filter((l) => /:CONSOLE[:(]|Uncaught|Refused to/.test(l));
}

/** Test-only copy of the page that writes the panel boxes into the DOM (the real page has no script). */
const PROBE = `<script>(function(){var r=[];var fs=document.querySelectorAll("figure.panel");for(var i=0;i<fs.length;i++){var b=fs[i].querySelector("svg").getBoundingClientRect();r.push([b.left+scrollX,b.top+scrollY,b.width,b.height,fs[i].dataset.kind,fs[i].dataset.plane]);}var p=document.createElement("pre");p.id="coxa-geometry";p.textContent=JSON.stringify({panels:r,height:document.documentElement.scrollHeight});document.body.appendChild(p);})();</script>`;

function regionStats(png: PNG, x0: number, y0: number, w: number, h: number) {
  let n = 0;
  let mean = 0;
  let m2 = 0;
  let paper = 0;
  let frame = 0;
  for (let y = Math.round(y0); y < Math.round(y0 + h); y++) {
    for (let x = Math.round(x0); x < Math.round(x0 + w); x++) {
      const q = (y * png.width + x) * 4;
      const r = png.data[q];
      const g = png.data[q + 1];
      const b = png.data[q + 2];
      const lum = 0.2126 * r + 0.7152 * g + 0.0722 * b; // ITU-R BT.709 luma weights
      if (r === 0xf6 && g === 0xf4 && b === 0xef) paper++;
      if (r === 0x0e && g === 0x12 && b === 0x16) frame++; // the panel frame colour, seen where no image is drawn
      n++;
      const d = lum - mean;
      mean += d / n;
      m2 += d * (lum - mean); // Welford
    }
  }
  const share = (count: number) => count / Math.max(1, n);
  return {
    n,
    mean,
    std: Math.sqrt(m2 / Math.max(1, n - 1)),
    paperShare: share(paper),
    frameShare: share(frame),
  };
}

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
    const page = join(dir, "report.html");
    writeFileSync(page, html);

    // 1. Where are the panels? (probe copy without the no-script policy)
    const probe = join(dir, "probe.html");
    writeFileSync(
      probe,
      html
        .replace(/<meta http-equiv="Content-Security-Policy"[^>]*>/, "")
        .replace("</body>", `${PROBE}</body>`),
    );
    const dom = await chromium([`--window-size=${WIDTH},1200`, "--dump-dom", `file://${probe}`]);
    const m = dom.stdout.match(/<pre id="coxa-geometry">([^<]+)<\/pre>/);
    expect(m, "geometry probe output").not.toBeNull();
    const geometry = JSON.parse(m![1]) as {
      panels: [number, number, number, number, string, string][];
      height: number;
    };
    expect(geometry.panels.length).toBe(24);

    // 2. The real page: no console output, screenshot tall enough for the whole document.
    const shot = join(dir, "report.png");
    const height = Math.min(16000, Math.ceil(geometry.height));
    const run = await chromium([
      `--window-size=${WIDTH},${height}`,
      `--screenshot=${shot}`,
      `file://${page}`,
    ]);
    expect(consoleLines(run.stderr)).toEqual([]);
    const png = PNG.sync.read(readFileSync(shot));
    expect([png.width, png.height]).toEqual([WIDTH, height]);

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
