/**
 * A `coxa align` killed with SIGKILL part-way leaves no half-written file under a final name:
 * every output that exists is complete (outputs go to temporary names and are renamed).
 */
import { spawn } from "node:child_process";
import { existsSync, readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { readTransform } from "../../src/geometry/transform-file.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { tempDir } from "../helpers/tmp.js";

const ROOT = join(import.meta.dirname, "..", "..");
const BIN = join(ROOT, "dist", "cli", "main.js");
const DATA = join(ROOT, "data-synthetic");
const dir = tempDir();

function runAndKill(out: string, delayMs: number): Promise<void> {
  return new Promise((resolve) => {
    const child = spawn(
      process.execPath,
      [
        BIN,
        "align",
        "--fixed",
        join(DATA, "ct.nii.gz"),
        "--moving",
        join(DATA, "mr.nii.gz"),
        "--out",
        out,
        "--quiet",
      ],
      {
        stdio: "ignore",
      },
    );
    const timer = setTimeout(() => child.kill("SIGKILL"), delayMs);
    child.on("exit", () => {
      clearTimeout(timer);
      resolve();
    });
  });
}

describe("coxa align killed mid-way", () => {
  it("every file under a final name is complete, at any kill time", async () => {
    for (const delay of [800, 2500, 3500, 4500, 6000]) {
      const out = join(dir, `k${delay}`);
      await runAndKill(out, delay);
      const names = existsSync(out) ? readdirSync(out) : [];
      const finals = names.filter((n) => !n.startsWith(".coxa-tmp-"));
      // The run takes several seconds: killed at 0.8 s it cannot have written its summary (written last).
      if (delay === 800) expect(finals).not.toContain("summary.json");
      for (const n of finals) {
        const path = join(out, n);
        if (n === "summary.json")
          expect(JSON.parse(readFileSync(path, "utf8")).verdict).toMatch(/pass|review|fail/);
        else if (n === "transform.json") expect(readTransform(path).record.format).toBe("coxa.transform");
        else if (n === "moving-on-fixed.nii.gz") expect(readNifti(path).volume.count).toBeGreaterThan(0);
        else if (n === "report.html")
          expect(readFileSync(path, "utf8").trimEnd().endsWith("</html>")).toBe(true);
        else expect.fail(`unexpected file ${n}`);
      }
    }
  }, 120_000);
});
