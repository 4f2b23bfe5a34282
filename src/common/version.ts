/** coxa's own name and version, read once from package.json (recorded in every output file). */
import { readFileSync } from "node:fs";

let cached: string | undefined;

/** The package version, e.g. "0.1.0". */
export function softwareVersion(): string {
  if (cached === undefined) {
    try {
      // src/common/version.ts and dist/common/version.js both sit two levels below the package root.
      const text = readFileSync(new URL("../../package.json", import.meta.url), "utf8");
      cached = (JSON.parse(text) as { version: string }).version;
    } catch {
      cached = "0.0.0";
    }
  }
  return cached;
}

/** The `software` block written into coxa's JSON outputs. */
export function softwareInfo(): { name: "coxa"; version: string } {
  return { name: "coxa", version: softwareVersion() };
}
