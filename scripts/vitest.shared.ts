// Shared vitest settings for the unit suite (needs only `npm ci`) and the system suite
// (needs Debian packages: python3-nibabel, python3-skimage, python3-scipy, nifti-bin, chromium, slurm).
import { fileURLToPath } from "node:url";

export const root = fileURLToPath(new URL("..", import.meta.url));

export const shared = {
  root,
  testTimeout: 120_000,
  hookTimeout: 300_000,
  pool: "forks" as const,
  maxWorkers: 2,
};
