/**
 * Debian's headless chromium for system tests: run it with the flags this closed network needs,
 * collect console lines, probe panel geometry, and measure screenshot regions.
 */
import { execFile } from "node:child_process";
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { PNG } from "pngjs";

export const CHROMIUM = "/usr/bin/chromium";
export const WIDTH = 1400;

export function chromium(args: string[]): Promise<{ stdout: string; stderr: string }> {
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
export function consoleLines(stderr: string): string[] {
  return stderr.split("\n").filter((l) => /:CONSOLE[:(]|Uncaught|Refused to/.test(l));
}

/** Test-only copy of the page that writes the panel boxes into the DOM (the real page has no script). */
export const PROBE = `<script>(function(){var r=[];var fs=document.querySelectorAll("figure.panel");for(var i=0;i<fs.length;i++){var b=fs[i].querySelector("svg").getBoundingClientRect();r.push([b.left+scrollX,b.top+scrollY,b.width,b.height,fs[i].dataset.kind,fs[i].dataset.plane]);}var p=document.createElement("pre");p.id="coxa-geometry";p.textContent=JSON.stringify({panels:r,height:document.documentElement.scrollHeight});document.body.appendChild(p);})();</script>`;

export function regionStats(png: PNG, x0: number, y0: number, w: number, h: number) {
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

/** Panel boxes (x, y, w, h, kind, plane) of a report page and the document height. */
export interface PanelGeometry {
  panels: [number, number, number, number, string, string][];
  height: number;
}

/**
 * Render a report page in chromium: find the panel boxes with a probe copy (the real page has
 * no script), then screenshot the real page at full height.
 * @returns panel geometry, the decoded screenshot and the page's console lines
 */
export async function screenshotReport(
  html: string,
  dir: string,
  name: string,
): Promise<{ geometry: PanelGeometry; png: PNG; console: string[]; shot: string }> {
  const page = join(dir, `${name}.html`);
  writeFileSync(page, html);
  const probe = join(dir, `${name}-probe.html`);
  writeFileSync(
    probe,
    html
      .replace(/<meta http-equiv="Content-Security-Policy"[^>]*>/, "")
      .replace("</body>", `${PROBE}</body>`),
  );
  const dom = await chromium([`--window-size=${WIDTH},1200`, "--dump-dom", `file://${probe}`]);
  const m = dom.stdout.match(/<pre id="coxa-geometry">([^<]+)<\/pre>/);
  if (!m) throw new Error("geometry probe produced no output");
  const geometry = JSON.parse(m[1]) as PanelGeometry;
  const shot = join(dir, `${name}.png`);
  const height = Math.min(16000, Math.ceil(geometry.height));
  const run = await chromium([`--window-size=${WIDTH},${height}`, `--screenshot=${shot}`, `file://${page}`]);
  return { geometry, png: PNG.sync.read(readFileSync(shot)), console: consoleLines(run.stderr), shot };
}
