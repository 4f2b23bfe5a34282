/** Fresh temporary directories for tests, removed after the run. */
import { mkdtempSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll } from "vitest";

/** A new empty directory under the OS temp dir; deleted when the test file finishes. */
export function tempDir(prefix = "coxa-test-"): string {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  return dir;
}
