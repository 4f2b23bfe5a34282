/**
 * Batch manifests: a CSV file (RFC 4180, ../export/csv.ts) with one case per row.
 *
 *   case,fixed,moving[,fixed_landmarks,moving_landmarks,fixed_labels,moving_labels]
 *
 * Column names are case-insensitive, in any order; `case`, `fixed` and `moving` are required,
 * the others optional (a column may be present and a cell empty). Landmark and label files come
 * in pairs: a row that gives one side gives the other. Lines whose first field starts with `#`
 * are comments; blank lines are skipped.
 *
 * Paths are relative to the manifest's folder unless absolute. With `confine`, every path must
 * stay inside that folder after resolving `..` and symbolic links.
 *
 * A case name becomes a folder name: letters, digits, `.`, `_` and `-`, starting with a letter
 * or digit, at most 100 characters, and none of the names the batch itself writes in its output
 * folder. Names that differ only by case count as duplicates (they would collide on
 * case-insensitive file systems).
 *
 * Validation is complete before anything runs: the first problem is a CoxaError BAD_MANIFEST
 * whose message names the manifest, the line and the problem.
 */
import { existsSync, readFileSync, realpathSync, statSync } from "node:fs";
import { dirname, isAbsolute, relative, resolve } from "node:path";
import { CsvSyntaxError, parseCsv } from "../common/csv.js";
import { CoxaError } from "../common/errors.js";

/** Required manifest columns. */
export const REQUIRED_COLUMNS = ["case", "fixed", "moving"] as const;
/** Optional manifest columns. */
export const OPTIONAL_COLUMNS = [
  "fixed_landmarks",
  "moving_landmarks",
  "fixed_labels",
  "moving_labels",
] as const;

/** An input file role of a case (a manifest column other than `case`). */
export type InputRole = "fixed" | "moving" | (typeof OPTIONAL_COLUMNS)[number];

/** Input roles in manifest order. */
export const INPUT_ROLES: readonly InputRole[] = ["fixed", "moving", ...OPTIONAL_COLUMNS];

/** Names a case may not have: files and folders the batch writes next to the case folders. */
export const RESERVED_CASE_NAMES: readonly string[] = ["cohort.csv", "cohort.html", "batch-runs"];
/** Also reserved: the per-shard cohort files (cohort-shard-K-of-N.csv / .html). */
const RESERVED_PATTERN = /^cohort.*\.(csv|html)$/i;

const SAFE_NAME = /^[A-Za-z0-9][A-Za-z0-9._-]*$/;
const MAX_NAME_LENGTH = 100;

/** One case of a manifest. */
export interface ManifestCase {
  /** Case name (its output folder's name). */
  name: string;
  /** 0-based position among the manifest's cases. */
  index: number;
  /** 1-based line of the manifest the case is on. */
  line: number;
  /** Absolute path of each input given for the case. */
  inputs: Partial<Record<InputRole, string>>;
}

/** A validated manifest. */
export interface Manifest {
  /** The manifest path as given. */
  path: string;
  /** Absolute folder the relative paths are resolved against. */
  dir: string;
  /** Columns present, in file order (lower case). */
  columns: string[];
  cases: ManifestCase[];
}

/** Options of readManifest / parseManifest. */
export interface ManifestOptions {
  /** Refuse paths that leave the manifest's folder (after `..` and symlinks). Default false. */
  confine?: boolean;
  /** Check that every input file exists and is a regular file. Default true. */
  checkFiles?: boolean;
}

/**
 * True when `name` can be a case folder name (see the module header).
 * @param name - proposed case name
 */
export function isSafeCaseName(name: string): boolean {
  return (
    name.length <= MAX_NAME_LENGTH &&
    SAFE_NAME.test(name) &&
    !RESERVED_CASE_NAMES.includes(name.toLowerCase()) &&
    !RESERVED_PATTERN.test(name) &&
    !name.toLowerCase().startsWith(".coxa")
  );
}

/**
 * Read and validate a manifest file.
 * @param path - manifest CSV path
 * @param options - confine, checkFiles
 * @throws CoxaError BAD_MANIFEST naming the manifest, the line and the problem
 */
export function readManifest(path: string, options: ManifestOptions = {}): Manifest {
  if (!existsSync(path)) throw new CoxaError("BAD_MANIFEST", "manifest file does not exist", path);
  let text: string;
  try {
    if (statSync(path).isDirectory())
      throw new CoxaError("BAD_MANIFEST", "is a directory, not a manifest", path);
    text = readFileSync(path, "utf8");
  } catch (err) {
    if (err instanceof CoxaError) throw err;
    throw new CoxaError(
      "BAD_MANIFEST",
      `cannot be read (${(err as NodeJS.ErrnoException).code ?? "error"})`,
      path,
    );
  }
  return parseManifest(text, path, options);
}

/**
 * Validate manifest text.
 * @param text - the CSV text
 * @param path - the manifest's path (relative paths resolve against its folder; named in errors)
 * @param options - confine, checkFiles
 * @throws CoxaError BAD_MANIFEST naming the manifest, the line and the problem: CSV syntax,
 *   unknown, repeated or missing columns, wrong field count, empty case or image cell, unsafe
 *   or repeated case name, a landmark or label file without its partner, a missing input file,
 *   a path escaping the folder with `confine`, no cases at all
 */
export function parseManifest(text: string, path: string, options: ManifestOptions = {}): Manifest {
  const fail = (line: number, message: string): never => {
    throw new CoxaError("BAD_MANIFEST", line > 0 ? `line ${line}: ${message}` : message, path);
  };
  const dir = dirname(resolve(path));
  const checkFiles = options.checkFiles ?? true;
  let records: ReturnType<typeof parseCsv>;
  try {
    records = parseCsv(text);
  } catch (err) {
    if (err instanceof CsvSyntaxError) fail(err.line, err.message);
    throw err;
  }
  records = records.filter((r) => r.quoted[0] || !r.fields[0].trimStart().startsWith("#"));
  if (records.length === 0)
    fail(0, "manifest is empty (expected a header case,fixed,moving and one row per case)");
  const header = records[0];
  const columns = header.fields.map((f) => f.trim().toLowerCase());
  const known = new Set<string>([...REQUIRED_COLUMNS, ...OPTIONAL_COLUMNS]);
  const seen = new Set<string>();
  for (const c of columns) {
    if (c === "") fail(header.line, "header has an empty column name");
    if (!known.has(c)) {
      fail(
        header.line,
        `unknown column "${c}" (known: ${[...REQUIRED_COLUMNS, ...OPTIONAL_COLUMNS].join(", ")})`,
      );
    }
    if (seen.has(c)) fail(header.line, `column "${c}" appears twice`);
    seen.add(c);
  }
  for (const c of REQUIRED_COLUMNS) {
    if (!seen.has(c))
      fail(header.line, `required column "${c}" is missing (header must hold case, fixed, moving)`);
  }
  if (records.length === 1) fail(0, "manifest has a header but no cases");

  let realDir: string | undefined;
  if (options.confine) {
    try {
      realDir = realpathSync(dir);
    } catch {
      realDir = dir;
    }
  }
  const cases: ManifestCase[] = [];
  const byLowerName = new Map<string, number>();
  for (let r = 1; r < records.length; r++) {
    const rec = records[r];
    if (rec.fields.length !== columns.length) {
      fail(rec.line, `${rec.fields.length} fields, the header has ${columns.length}`);
    }
    const cell = (c: string): string => {
      const at = columns.indexOf(c);
      if (at < 0) return "";
      return rec.quoted[at] ? rec.fields[at] : rec.fields[at].trim();
    };
    const name = cell("case");
    if (name === "") fail(rec.line, "case name is empty");
    if (!isSafeCaseName(name)) {
      fail(
        rec.line,
        `case name "${name}" is not a safe folder name (letters, digits, . _ -, starting with a letter or digit, at most ${MAX_NAME_LENGTH} characters, not ${RESERVED_CASE_NAMES.join(", ")} or cohort*.csv/html)`,
      );
    }
    const earlier = byLowerName.get(name.toLowerCase());
    if (earlier !== undefined) fail(rec.line, `case "${name}" repeats the case name of line ${earlier}`);
    byLowerName.set(name.toLowerCase(), rec.line);
    const inputs: Partial<Record<InputRole, string>> = {};
    for (const role of INPUT_ROLES) {
      const given = cell(role);
      if (given === "") {
        if (role === "fixed" || role === "moving") fail(rec.line, `case "${name}" has no ${role} image`);
        continue;
      }
      const absolute = resolve(dir, given);
      if (realDir !== undefined) {
        const lexical = relative(dir, absolute);
        if (lexical.startsWith("..") || isAbsolute(lexical)) {
          fail(rec.line, `${role} path "${given}" leaves the manifest's folder ${dir} (--confine)`);
        }
      }
      if (checkFiles) {
        if (!existsSync(absolute)) fail(rec.line, `${role} file "${given}" does not exist (${absolute})`);
        if (!statSync(absolute).isFile()) fail(rec.line, `${role} path "${given}" is not a regular file`);
      }
      if (realDir !== undefined && existsSync(absolute)) {
        const real = realpathSync(absolute);
        const rel = relative(realDir, real);
        if (rel.startsWith("..") || isAbsolute(rel)) {
          fail(
            rec.line,
            `${role} path "${given}" leads outside the manifest's folder through a symbolic link (to ${real}; --confine)`,
          );
        }
      }
      inputs[role] = absolute;
    }
    for (const [a, b] of [
      ["fixed_landmarks", "moving_landmarks"],
      ["fixed_labels", "moving_labels"],
    ] as const) {
      if ((inputs[a] === undefined) !== (inputs[b] === undefined)) {
        const given = inputs[a] !== undefined ? a : b;
        const missing = inputs[a] !== undefined ? b : a;
        fail(rec.line, `case "${name}" gives ${given} but no ${missing}`);
      }
    }
    cases.push({ name, index: cases.length, line: rec.line, inputs });
  }
  return { path, dir, columns, cases };
}
