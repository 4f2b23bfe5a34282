/**
 * Crash-safe output. Every file coxa writes goes to a temporary name in the same directory
 * and is renamed over the final name only when complete, so an interrupted run never leaves a
 * half-written file under a final name (rename is atomic within one file system, POSIX).
 */
import { randomBytes } from "node:crypto";
import { closeSync, fsyncSync, openSync, realpathSync, renameSync, rmSync, writeSync } from "node:fs";
import { basename, dirname, join, resolve } from "node:path";
import { CoxaError } from "./errors.js";

/** Temporary sibling path for `finalPath`; matches the `.coxa-tmp-*` pattern that cleanups remove. */
export function tempPathFor(finalPath: string): string {
  return join(dirname(finalPath), `.coxa-tmp-${randomBytes(6).toString("hex")}-${basename(finalPath)}`);
}

/**
 * Write `data` (one buffer or several in order) to `finalPath` atomically.
 * @param finalPath - destination; replaced only when the whole content is on disk
 * @param data - bytes or text
 */
export function writeFileAtomic(finalPath: string, data: Uint8Array | string | readonly Uint8Array[]): void {
  const tmp = tempPathFor(finalPath);
  let fd = -1;
  try {
    fd = openSync(tmp, "w", 0o644);
    if (typeof data === "string") {
      writeSync(fd, data);
    } else if (data instanceof Uint8Array) {
      writeAll(fd, data);
    } else {
      for (const part of data) writeAll(fd, part);
    }
    fsyncSync(fd);
    closeSync(fd);
    fd = -1;
    renameSync(tmp, finalPath);
  } catch (err) {
    if (fd >= 0) closeSync(fd);
    rmSync(tmp, { force: true });
    throw err;
  }
}

function writeAll(fd: number, data: Uint8Array): void {
  let offset = 0;
  while (offset < data.length) offset += writeSync(fd, data, offset, data.length - offset);
}

/** Write a JSON value (2-space indented, trailing newline) atomically. */
export function writeJsonAtomic(finalPath: string, value: unknown): void {
  writeFileAtomic(finalPath, `${JSON.stringify(value, null, 2)}\n`);
}

/**
 * Refuse outputs that would replace one of the inputs (compared after resolving links).
 * @param inputs - input paths as given (undefined entries are skipped)
 * @param outputs - output paths
 * @throws CoxaError WOULD_OVERWRITE naming the input
 */
export function refuseOverwritingInputs(
  inputs: readonly (string | undefined)[],
  outputs: readonly string[],
): void {
  const real = (p: string) => {
    try {
      return realpathSync(p);
    } catch {
      return resolve(p);
    }
  };
  const given = new Map<string, string>();
  for (const p of inputs) if (p) given.set(real(p), p);
  for (const out of outputs) {
    const hit = given.get(real(out));
    if (hit)
      throw new CoxaError(
        "WOULD_OVERWRITE",
        "is an input and would be overwritten by an output; choose another --out",
        hit,
      );
  }
}
