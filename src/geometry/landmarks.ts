/**
 * Landmark files: CSV with the header `label,x,y,z` (design.md), coordinates in world RAS+ mm.
 *
 * Reading follows RFC 4180 ("Common Format and MIME Type for CSV Files"): comma-separated
 * fields, optional double quotes around a field, "" for a quote inside a quoted field, quoted
 * fields may hold commas and line breaks; CRLF or LF line ends; a UTF-8 byte-order mark is
 * ignored. The four columns may come in any order; header names are case-insensitive and
 * trimmed. Blank lines are skipped. Unquoted labels are trimmed, quoted labels kept verbatim.
 *
 * `lps: true` reads coordinates given in LPS (DICOM-oriented viewers) and flips x and y to RAS
 * (design.md); writing with `lps: true` flips them back.
 *
 * Every problem is a CoxaError BAD_LANDMARKS with a one-line message naming the file and,
 * where it applies, the line.
 */
import { existsSync, readFileSync, statSync } from "node:fs";
import { writeFileAtomic } from "../common/atomic.js";
import { type CsvRecord, CsvSyntaxError, parseCsv } from "../common/csv.js";
import { CoxaError } from "../common/errors.js";

/** One landmark: a label and a point in world RAS+ mm. */
export interface Landmark {
  label: string;
  /** [x, y, z] world RAS+ mm. */
  pointMm: [number, number, number];
  /** 1-based line of the file where the landmark starts (0 when not read from a file). */
  line: number;
}

/** Landmarks of two files matched by label, in the order of the fixed file. */
export interface LandmarkPairs {
  labels: string[];
  /** Fixed points, flat xyz, world mm. */
  fixedMm: Float64Array;
  /** Moving points, flat xyz, world mm, paired with `fixedMm`. */
  movingMm: Float64Array;
}

/** Options for reading and writing landmark files. */
export interface LandmarkFileOptions {
  /** Coordinates in the file are LPS: flip x and y (default false). */
  lps?: boolean;
}

const COLUMNS = ["label", "x", "y", "z"] as const;
const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

/** Split CSV text into records (RFC 4180, src/common/csv.ts), syntax errors as BAD_LANDMARKS. */
function parseLandmarkCsv(text: string, path: string): CsvRecord[] {
  try {
    return parseCsv(text);
  } catch (err) {
    if (err instanceof CsvSyntaxError)
      throw new CoxaError("BAD_LANDMARKS", `line ${err.line}: ${err.message}`, path);
    throw err;
  }
}

/**
 * Read a landmark CSV file.
 * @param path - file path
 * @param options - `lps: true` when the coordinates are LPS
 * @returns the landmarks in file order, coordinates in world RAS+ mm
 * @throws CoxaError BAD_LANDMARKS (naming the file and line) for a missing or unreadable file,
 *   a header without exactly the columns label, x, y, z, a row with the wrong number of fields,
 *   an empty or repeated label, a coordinate that is not a finite number, or no rows
 */
export function readLandmarks(path: string, options: LandmarkFileOptions = {}): Landmark[] {
  if (!existsSync(path)) throw new CoxaError("BAD_LANDMARKS", "landmark file does not exist", path);
  let text: string;
  try {
    if (statSync(path).isDirectory()) {
      throw new CoxaError("BAD_LANDMARKS", "is a directory, not a landmark file", path);
    }
    text = readFileSync(path, "utf8");
  } catch (err) {
    if (err instanceof CoxaError) throw err;
    throw new CoxaError("BAD_LANDMARKS", `cannot be read (${(err as Error).message})`, path);
  }
  const records = parseLandmarkCsv(text, path);
  if (records.length === 0)
    throw new CoxaError("BAD_LANDMARKS", "file is empty (expected header label,x,y,z)", path);

  const header = records[0];
  const columnOf = new Map<string, number>();
  for (let c = 0; c < header.fields.length; c++) {
    const name = header.fields[c].trim().toLowerCase();
    if (!(COLUMNS as readonly string[]).includes(name)) {
      throw new CoxaError(
        "BAD_LANDMARKS",
        `line ${header.line}: unexpected column "${header.fields[c].trim()}" in the header (expected label,x,y,z)`,
        path,
      );
    }
    if (columnOf.has(name)) {
      throw new CoxaError(
        "BAD_LANDMARKS",
        `line ${header.line}: column "${name}" appears twice in the header`,
        path,
      );
    }
    columnOf.set(name, c);
  }
  for (const name of COLUMNS) {
    if (!columnOf.has(name)) {
      throw new CoxaError(
        "BAD_LANDMARKS",
        `line ${header.line}: the header has no "${name}" column (expected label,x,y,z)`,
        path,
      );
    }
  }
  const labelCol = columnOf.get("label") as number;
  const axisCols = [columnOf.get("x"), columnOf.get("y"), columnOf.get("z")] as number[];
  const flip = options.lps === true;

  const seen = new Map<string, number>();
  const out: Landmark[] = [];
  for (let r = 1; r < records.length; r++) {
    const rec = records[r];
    if (rec.fields.length !== header.fields.length) {
      throw new CoxaError(
        "BAD_LANDMARKS",
        `line ${rec.line}: has ${rec.fields.length} field(s), the header has ${header.fields.length}`,
        path,
      );
    }
    const label = rec.quoted[labelCol] ? rec.fields[labelCol] : rec.fields[labelCol].trim();
    if (label === "") throw new CoxaError("BAD_LANDMARKS", `line ${rec.line}: empty label`, path);
    const earlier = seen.get(label);
    if (earlier !== undefined) {
      throw new CoxaError(
        "BAD_LANDMARKS",
        `line ${rec.line}: label "${label}" repeats the one on line ${earlier}`,
        path,
      );
    }
    seen.set(label, rec.line);
    const point: [number, number, number] = [0, 0, 0];
    for (let a = 0; a < 3; a++) {
      const raw = rec.fields[axisCols[a]].trim();
      const axis = COLUMNS[a + 1];
      if (!NUMBER.test(raw)) {
        throw new CoxaError(
          "BAD_LANDMARKS",
          `line ${rec.line}: ${axis} of "${label}" is "${raw}", not a number`,
          path,
        );
      }
      const v = Number(raw);
      if (!Number.isFinite(v)) {
        throw new CoxaError(
          "BAD_LANDMARKS",
          `line ${rec.line}: ${axis} of "${label}" is ${raw}, not a finite number`,
          path,
        );
      }
      point[a] = v;
    }
    if (flip) {
      point[0] = -point[0];
      point[1] = -point[1];
    }
    // -0 from a flip of 0 reads back as 0.
    for (let a = 0; a < 3; a++) if (point[a] === 0) point[a] = 0;
    out.push({ label, pointMm: point, line: rec.line });
  }
  if (out.length === 0) throw new CoxaError("BAD_LANDMARKS", "has a header but no landmarks", path);
  return out;
}

function quoteField(value: string): string {
  if (/[",\r\n]/.test(value) || value.trim() !== value) return `"${value.replace(/"/g, '""')}"`;
  return value;
}

/**
 * Write landmarks as CSV (`label,x,y,z`), atomically (temporary name, then rename).
 * Numbers are written in the shortest form that reads back to the same double.
 * @param path - destination
 * @param landmarks - labels and world RAS+ mm points
 * @param options - `lps: true` writes LPS coordinates (x and y flipped)
 * @throws CoxaError BAD_ARGUMENT for an empty or repeated label or a non-finite coordinate
 */
export function writeLandmarks(
  path: string,
  landmarks: readonly Pick<Landmark, "label" | "pointMm">[],
  options: LandmarkFileOptions = {},
): void {
  const flip = options.lps === true;
  const seen = new Set<string>();
  const lines = ["label,x,y,z"];
  for (const lm of landmarks) {
    if (lm.label === "") throw new CoxaError("BAD_ARGUMENT", "landmark with an empty label", path);
    if (seen.has(lm.label)) throw new CoxaError("BAD_ARGUMENT", `landmark label "${lm.label}" repeats`, path);
    seen.add(lm.label);
    const p = lm.pointMm;
    for (let a = 0; a < 3; a++) {
      if (!Number.isFinite(p[a])) {
        throw new CoxaError("BAD_ARGUMENT", `landmark "${lm.label}" has a non-finite coordinate`, path);
      }
    }
    const x = flip ? -p[0] : p[0];
    const y = flip ? -p[1] : p[1];
    lines.push(`${quoteField(lm.label)},${String(x + 0)},${String(y + 0)},${String(p[2] + 0)}`);
  }
  writeFileAtomic(path, `${lines.join("\n")}\n`);
}

/**
 * Match fixed and moving landmarks by label.
 * @param fixed - landmarks of the fixed image
 * @param moving - landmarks of the moving image
 * @param fixedPath - file the fixed landmarks came from (for messages)
 * @param movingPath - file the moving landmarks came from (for messages)
 * @returns labels in fixed-file order with paired points
 * @throws CoxaError BAD_LANDMARKS naming a label present in only one of the files (and that
 *   file), or when either list is empty
 */
export function pairLandmarks(
  fixed: readonly Pick<Landmark, "label" | "pointMm">[],
  moving: readonly Pick<Landmark, "label" | "pointMm">[],
  fixedPath: string,
  movingPath: string,
): LandmarkPairs {
  if (fixed.length === 0) throw new CoxaError("BAD_LANDMARKS", "has no landmarks", fixedPath);
  if (moving.length === 0) throw new CoxaError("BAD_LANDMARKS", "has no landmarks", movingPath);
  const movingByLabel = new Map<string, Pick<Landmark, "label" | "pointMm">>();
  for (const lm of moving) movingByLabel.set(lm.label, lm);
  const fixedLabels = new Set<string>();
  for (const lm of fixed) {
    fixedLabels.add(lm.label);
    if (!movingByLabel.has(lm.label)) {
      throw new CoxaError("BAD_LANDMARKS", `label "${lm.label}" has no match in ${movingPath}`, fixedPath);
    }
  }
  for (const lm of moving) {
    if (!fixedLabels.has(lm.label)) {
      throw new CoxaError("BAD_LANDMARKS", `label "${lm.label}" has no match in ${fixedPath}`, movingPath);
    }
  }
  const n = fixed.length;
  const labels: string[] = [];
  const fixedMm = new Float64Array(3 * n);
  const movingMm = new Float64Array(3 * n);
  for (let i = 0; i < n; i++) {
    const f = fixed[i];
    const m = movingByLabel.get(f.label) as Pick<Landmark, "label" | "pointMm">;
    labels.push(f.label);
    for (let a = 0; a < 3; a++) {
      fixedMm[3 * i + a] = f.pointMm[a];
      movingMm[3 * i + a] = m.pointMm[a];
    }
  }
  return { labels, fixedMm, movingMm };
}
