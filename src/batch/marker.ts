/**
 * Per-case state files of a batch, in OUT/<case>/:
 *
 *  - case.json: written when the case starts (name, manifest position, input paths, settings).
 *  - done.json, the done-marker: written LAST and atomically (temporary name, then rename) when
 *    every output of the case is on disk. It records the SHA-256 of every input file, the
 *    settings that change results (with their SHA-256 over a canonical JSON form: keys sorted,
 *    no spaces) and the SHA-256 and size of every output file.
 *  - failed.json: written instead when the case could not be completed (bad input, crash).
 *
 * A case counts as complete (skipped by --resume) only when done.json exists and parses, its
 * input hashes equal the current files' hashes role by role, its settings hash equals the
 * current settings' hash, and every listed output exists with the recorded SHA-256 (full
 * hashes, not sizes: a truncated or replaced output is caught). A case killed mid-way has no
 * done.json (the old one is deleted before a case starts) and is run again.
 */
import { existsSync, readFileSync, statSync } from "node:fs";
import { join } from "node:path";
import { sha256Buffer, sha256File } from "../common/hash.js";
import type { InputRole } from "./manifest.js";

/** File names of the case state files. */
export const CASE_RECORD = "case.json";
export const DONE_MARKER = "done.json";
export const FAILED_MARKER = "failed.json";

/** Path and SHA-256 of one input. */
export interface HashedFile {
  path: string;
  sha256: string;
}

/** One output file of a case, relative to the case folder. */
export interface OutputRecord {
  file: string;
  sha256: string;
  bytes: number;
}

/** Which run completed a case. */
export interface RunRef {
  run_id: string;
  host: string;
  pid: number;
  shard: string | null;
}

/** The done-marker (done.json). */
export interface DoneMarker {
  format: "coxa.case-done";
  version: 1;
  case: string;
  index: number;
  status: "done";
  verdict: "pass" | "review" | "fail";
  /** Exit code coxa align gave (0 or 3). */
  align_exit_code: number;
  inputs: Partial<Record<InputRole, HashedFile>>;
  settings: unknown;
  settings_sha256: string;
  outputs: OutputRecord[];
  /** Wall time of the case (align and export), s. */
  seconds: number;
  /** Peak resident memory of the process that ran the case, MB (null when unknown). */
  peak_rss_mb: number | null;
  /** CPU time (user + system, all threads) spent on the case, s. */
  cpu_s: number;
  finished_at: string;
  run: RunRef;
  software: { name: string; version: string };
}

/** The failure record (failed.json). */
export interface FailedMarker {
  format: "coxa.case-failed";
  version: 1;
  case: string;
  index: number;
  status: "failed";
  /** One line, e.g. "/data/p1/mr.nii.gz: not a NIfTI file" or "crashed (signal SIGKILL)". */
  reason: string;
  /** CoxaError code, "CRASHED" or "INTERNAL". */
  code: string;
  seconds: number;
  finished_at: string;
  run: RunRef;
  software: { name: string; version: string };
}

/**
 * A canonical JSON text (object keys sorted at every level, no spaces), so equal settings
 * always give the same hash.
 * @param value - JSON-compatible value
 */
export function canonicalJson(value: unknown): string {
  if (value === null || typeof value !== "object") return JSON.stringify(value ?? null);
  if (Array.isArray(value)) return `[${value.map((v) => canonicalJson(v)).join(",")}]`;
  const entries = Object.entries(value as Record<string, unknown>)
    .filter(([, v]) => v !== undefined)
    .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
  return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${canonicalJson(v)}`).join(",")}}`;
}

/**
 * SHA-256 of the canonical JSON of `settings`.
 * @param settings - the result-changing settings of a batch
 */
export function settingsHash(settings: unknown): string {
  return sha256Buffer(new TextEncoder().encode(canonicalJson(settings)));
}

/**
 * SHA-256 of every input file of a case.
 * @param inputs - absolute path per role
 */
export async function hashInputs(
  inputs: Partial<Record<InputRole, string>>,
): Promise<Partial<Record<InputRole, HashedFile>>> {
  const out: Partial<Record<InputRole, HashedFile>> = {};
  for (const [role, path] of Object.entries(inputs) as [InputRole, string][]) {
    out[role] = { path, sha256: await sha256File(path) };
  }
  return out;
}

/**
 * Hash and size of output files.
 * @param caseDir - the case folder
 * @param files - paths relative to it
 */
export async function recordOutputs(caseDir: string, files: readonly string[]): Promise<OutputRecord[]> {
  const out: OutputRecord[] = [];
  for (const file of files) {
    const path = join(caseDir, file);
    out.push({ file, sha256: await sha256File(path), bytes: statSync(path).size });
  }
  return out;
}

/**
 * Read a JSON state file; undefined when absent or not parseable (a torn file cannot exist
 * under the final name since writes are atomic, but a user may have edited it).
 * @param path - file path
 */
export function readStateFile<T>(path: string): T | undefined {
  if (!existsSync(path)) return undefined;
  try {
    return JSON.parse(readFileSync(path, "utf8")) as T;
  } catch {
    return undefined;
  }
}

/** Outcome of a resume check. */
export interface CompletenessCheck {
  complete: boolean;
  /** Why not, in one phrase (empty when complete). */
  reason: string;
  marker?: DoneMarker;
}

/**
 * Is a case complete for these inputs and settings? (See the module header for the rule.)
 * @param caseDir - OUT/<case>
 * @param inputs - current SHA-256 per input role
 * @param settingsSha - SHA-256 of the current settings
 * @param verifyOutputs - "sha256" (default) rehashes every output; "size" compares sizes only
 */
export async function checkComplete(
  caseDir: string,
  inputs: Partial<Record<InputRole, HashedFile>>,
  settingsSha: string,
  verifyOutputs: "sha256" | "size" = "sha256",
): Promise<CompletenessCheck> {
  const marker = readStateFile<DoneMarker>(join(caseDir, DONE_MARKER));
  if (!marker) return { complete: false, reason: "no done-marker" };
  if (marker.format !== "coxa.case-done" || marker.version !== 1 || !Array.isArray(marker.outputs)) {
    return { complete: false, reason: "done-marker is not a coxa case record" };
  }
  if (marker.settings_sha256 !== settingsSha) return { complete: false, reason: "settings changed" };
  const roles = new Set([...Object.keys(inputs), ...Object.keys(marker.inputs ?? {})]);
  for (const role of roles) {
    const now = inputs[role as InputRole];
    const then = marker.inputs?.[role as InputRole];
    if (!now || !then) return { complete: false, reason: `input ${role} added or removed` };
    if (now.sha256 !== then.sha256) return { complete: false, reason: `input ${role} changed (${now.path})` };
  }
  for (const o of marker.outputs) {
    const path = join(caseDir, o.file);
    if (!existsSync(path)) return { complete: false, reason: `output ${o.file} is missing` };
    if (statSync(path).size !== o.bytes) return { complete: false, reason: `output ${o.file} changed size` };
    if (verifyOutputs === "sha256" && (await sha256File(path)) !== o.sha256) {
      return { complete: false, reason: `output ${o.file} changed` };
    }
  }
  return { complete: true, reason: "", marker };
}
