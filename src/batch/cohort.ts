/**
 * Cohort summaries of a batch, built only from what is on disk in OUT (so that shards run
 * separately, even on different machines sharing OUT, merge by summarising once more):
 *
 *  - cohort.csv: one row per case, columns
 *      case,status,verdict,tre_mean_mm,tre_max_mm,overlap_fraction,seconds,dice_mean,report
 *    `status` is `done` or `failed: <reason>`; `verdict` is pass / review / fail for done cases
 *    and empty otherwise; TRE is the mean / max landmark error of align's summary.json (empty
 *    without landmarks); `seconds` the wall time of the whole case (align and export);
 *    `dice_mean` the mean Dice over labels (empty without labels); `report` the case's
 *    report.html relative to OUT. Numbers are written with up to 4 decimals.
 *  - cohort.html: verdict counts, the distribution of mean landmark errors (histogram with the
 *    verdict thresholds), and a table linking each case's report. Self-contained and offline.
 *
 * A case folder is read as: done.json present and every output it lists present with the
 * recorded size -> `done`; failed.json -> `failed: <reason>`; otherwise
 * `failed: incomplete (no done-marker; rerun with --resume)`; no folder at all (a case of the
 * manifest that never ran) -> `failed: not run`.
 */
import { existsSync, readdirSync, statSync } from "node:fs";
import { basename, join } from "node:path";
import { writeFileAtomic } from "../common/atomic.js";
import { formatCsv } from "../common/csv.js";
import { softwareInfo } from "../common/version.js";
import { DEFAULT_THRESHOLDS } from "../register/quality.js";
import {
  type Cell,
  careNote,
  escapeHtml,
  formatNumber,
  html,
  renderKeyValueTable,
  renderPage,
  renderTable,
  section,
  type Verdict,
  verdictBanner,
} from "../report/html.js";
import { histogramPlot } from "../report/svg-plot.js";
import { isSafeCaseName } from "./manifest.js";
import {
  CASE_RECORD,
  DONE_MARKER,
  type DoneMarker,
  FAILED_MARKER,
  type FailedMarker,
  readStateFile,
} from "./marker.js";

/** cohort.csv columns, in order. */
export const COHORT_COLUMNS = [
  "case",
  "status",
  "verdict",
  "tre_mean_mm",
  "tre_max_mm",
  "overlap_fraction",
  "seconds",
  "dice_mean",
  "report",
] as const;

/** One row of cohort.csv. */
export interface CohortRow {
  case: string;
  /** Manifest position when known (orders the rows), else null. */
  index: number | null;
  /** "done" or "failed: <reason>". */
  status: string;
  verdict: Verdict | null;
  tre_mean_mm: number | null;
  tre_max_mm: number | null;
  overlap_fraction: number | null;
  seconds: number | null;
  dice_mean: number | null;
  /** report.html relative to OUT, when it exists. */
  report: string | null;
}

/** Counts over a cohort. */
export interface CohortCounts {
  cases: number;
  done: number;
  failed: number;
  pass: number;
  review: number;
  fail: number;
}

function num(v: unknown): number | null {
  return typeof v === "number" && Number.isFinite(v) ? v : null;
}

function pick(obj: unknown, ...keys: string[]): unknown {
  let v: unknown = obj;
  for (const k of keys) {
    if (v === null || typeof v !== "object") return undefined;
    v = (v as Record<string, unknown>)[k];
  }
  return v;
}

/** Mean of the Dice values in a summary's `labels` block (object or list form), or null. */
function meanDice(labels: unknown): number | null {
  if (labels === null || typeof labels !== "object") return null;
  const values: number[] = [];
  const visit = (v: unknown) => {
    if (typeof v === "number" && Number.isFinite(v)) values.push(v);
    else if (v && typeof v === "object" && typeof (v as { dice?: unknown }).dice === "number") {
      values.push((v as { dice: number }).dice);
    }
  };
  const dice = (labels as { dice?: unknown }).dice ?? (labels as { per_label?: unknown }).per_label ?? labels;
  if (Array.isArray(dice)) for (const d of dice) visit(d);
  else if (dice && typeof dice === "object") for (const d of Object.values(dice)) visit(d);
  if (values.length === 0) return null;
  return values.reduce((a, b) => a + b, 0) / values.length;
}

/**
 * The cohort row of one case, from its folder.
 * @param out - the batch output folder
 * @param name - case name
 * @param index - manifest position, when known
 */
export function readCaseRow(out: string, name: string, index: number | null = null): CohortRow {
  const dir = join(out, name);
  const row: CohortRow = {
    case: name,
    index,
    status: "failed: not run",
    verdict: null,
    tre_mean_mm: null,
    tre_max_mm: null,
    overlap_fraction: null,
    seconds: null,
    dice_mean: null,
    report: existsSync(join(dir, "report.html")) ? `${name}/report.html` : null,
  };
  if (!existsSync(dir)) return row;
  const done = readStateFile<DoneMarker>(join(dir, DONE_MARKER));
  const failed = readStateFile<FailedMarker>(join(dir, FAILED_MARKER));
  if (row.index === null) {
    const recorded =
      done?.index ?? failed?.index ?? readStateFile<{ index?: number }>(join(dir, CASE_RECORD))?.index;
    row.index = typeof recorded === "number" ? recorded : null;
  }
  if (done && done.format === "coxa.case-done" && Array.isArray(done.outputs)) {
    const missing = done.outputs.find((o) => {
      const p = join(dir, o.file);
      return !existsSync(p) || statSync(p).size !== o.bytes;
    });
    if (missing) {
      row.status = `failed: output ${missing.file} is missing or changed since the case finished`;
      return row;
    }
    const summary = readStateFile<Record<string, unknown>>(join(dir, "summary.json"));
    row.status = "done";
    row.verdict = done.verdict;
    row.seconds = num(done.seconds);
    row.tre_mean_mm = num(pick(summary, "landmarks", "tre_mm", "mean"));
    row.tre_max_mm = num(pick(summary, "landmarks", "tre_mm", "max"));
    row.overlap_fraction = num(pick(summary, "overlap_fraction"));
    row.dice_mean = meanDice(pick(summary, "labels"));
    return row;
  }
  if (failed && failed.format === "coxa.case-failed") {
    row.status = `failed: ${failed.reason}`;
    row.seconds = num(failed.seconds);
    return row;
  }
  row.status = "failed: incomplete (no done-marker; rerun with --resume)";
  return row;
}

/**
 * Case folders found in OUT: sub-folders with a safe case name holding case.json, done.json
 * or failed.json.
 * @param out - the batch output folder
 */
export function findCaseFolders(out: string): string[] {
  if (!existsSync(out)) return [];
  const names: string[] = [];
  for (const entry of readdirSync(out, { withFileTypes: true })) {
    if (!entry.isDirectory() || !isSafeCaseName(entry.name)) continue;
    const dir = join(out, entry.name);
    if ([CASE_RECORD, DONE_MARKER, FAILED_MARKER].some((f) => existsSync(join(dir, f))))
      names.push(entry.name);
  }
  return names;
}

/**
 * Rows for the given cases (manifest order) or, without a list, for every case folder found,
 * ordered by recorded manifest position then name.
 * @param out - the batch output folder
 * @param cases - cases to report, with their manifest positions
 */
export function collectRows(out: string, cases?: readonly { name: string; index: number }[]): CohortRow[] {
  if (cases) return cases.map((c) => readCaseRow(out, c.name, c.index));
  const rows = findCaseFolders(out).map((name) => readCaseRow(out, name));
  rows.sort(
    (a, b) =>
      (a.index ?? Infinity) - (b.index ?? Infinity) || (a.case < b.case ? -1 : a.case > b.case ? 1 : 0),
  );
  return rows;
}

/**
 * Verdict and status counts.
 * @param rows - cohort rows
 */
export function countRows(rows: readonly CohortRow[]): CohortCounts {
  const c: CohortCounts = { cases: rows.length, done: 0, failed: 0, pass: 0, review: 0, fail: 0 };
  for (const r of rows) {
    if (r.status === "done") {
      c.done++;
      if (r.verdict) c[r.verdict]++;
    } else c.failed++;
  }
  return c;
}

/**
 * Exit code of a batch over these rows: 0 when every case is done with verdict pass or
 * review, 3 when any case has verdict fail or could not be completed (status failed).
 * @param rows - cohort rows
 */
export function batchExitCode(rows: readonly CohortRow[]): 0 | 3 {
  const c = countRows(rows);
  return c.fail > 0 || c.failed > 0 ? 3 : 0;
}

function round4(v: number | null): number | null {
  return v === null ? null : Math.round(v * 1e4) / 1e4;
}

/**
 * cohort.csv text.
 * @param rows - cohort rows
 */
export function cohortCsv(rows: readonly CohortRow[]): string {
  return formatCsv(
    COHORT_COLUMNS,
    rows.map((r) => [
      r.case,
      r.status,
      r.verdict ?? "",
      round4(r.tre_mean_mm),
      round4(r.tre_max_mm),
      round4(r.overlap_fraction),
      round4(r.seconds),
      round4(r.dice_mean),
      r.report ?? "",
    ]),
  );
}

/**
 * cohort.html page.
 * @param rows - cohort rows
 * @param title - page title (e.g. the output folder's name)
 */
export function cohortHtml(rows: readonly CohortRow[], title: string): string {
  const c = countRows(rows);
  const overall: Verdict = c.fail > 0 || c.failed > 0 ? "fail" : c.review > 0 ? "review" : "pass";
  const reasons = [
    `${c.cases} case${c.cases === 1 ? "" : "s"}: ${c.pass} pass, ${c.review} review, ${c.fail} fail, ${c.failed} not completed.`,
  ];
  if (c.failed > 0)
    reasons.push(
      "Cases that were not completed are listed with their reason; fix the input and rerun with --resume.",
    );
  if (c.fail > 0)
    reasons.push("Cases with verdict fail need a person to look at their reports before any use.");
  const counts = renderKeyValueTable(
    [
      ["cases", c.cases],
      ["pass", c.pass],
      ["review", c.review],
      ["fail", c.fail],
      ["not completed", c.failed],
    ],
    "Verdict counts",
  );
  const tre = rows.map((r) => r.tre_mean_mm).filter((v): v is number => v !== null);
  const plot =
    tre.length > 0
      ? histogramPlot({
          title: "Mean landmark error per case",
          xLabel: "mean landmark error (mm)",
          yLabel: "cases",
          values: tre,
          referenceLines: [
            {
              axis: "x",
              value: DEFAULT_THRESHOLDS.trePassMm,
              label: `pass ≤ ${DEFAULT_THRESHOLDS.trePassMm} mm`,
            },
            {
              axis: "x",
              value: DEFAULT_THRESHOLDS.treReviewMm,
              label: `review ≤ ${DEFAULT_THRESHOLDS.treReviewMm} mm`,
            },
          ],
        })
      : "<p>No case has landmarks, so there is no landmark error to show.</p>";
  const table = renderTable(
    [
      { label: "case" },
      { label: "status" },
      { label: "verdict" },
      { label: "mean TRE (mm)", numeric: true },
      { label: "max TRE (mm)", numeric: true },
      { label: "overlap", numeric: true },
      { label: "mean Dice", numeric: true },
      { label: "seconds", numeric: true },
      { label: "report" },
    ],
    rows.map((r): Cell[] => [
      r.case,
      r.status,
      r.verdict ?? "",
      html(formatNumber(r.tre_mean_mm, 2)),
      html(formatNumber(r.tre_max_mm, 2)),
      html(formatNumber(r.overlap_fraction, 3)),
      html(formatNumber(r.dice_mean, 3)),
      html(formatNumber(r.seconds, 1)),
      r.report ? html(`<a href="${escapeHtml(encodeURI(r.report))}">report</a>`) : "",
    ]),
    {
      caption: "Cases in manifest order",
      flaggedRows: new Set(rows.flatMap((r, i) => (r.status !== "done" || r.verdict === "fail" ? [i] : []))),
    },
  );
  const software = softwareInfo();
  return renderPage({
    title: `Cohort: ${title}`,
    subtitle: `${software.name} ${software.version}`,
    lead: verdictBanner(overall, reasons, "Cohort") + careNote(),
    toc: [
      ["counts", "Counts"],
      ["tre", "Landmark error"],
      ["cases", "Cases"],
    ],
    body: [
      section("counts", "Verdict counts", counts),
      section("tre", "Landmark error distribution", plot),
      section("cases", "Cases", table),
    ].join("\n"),
    footer: "Summary of the case folders on disk; each case's report holds its images and reasons.",
  });
}

/** What summarizeBatch returns. */
export interface CohortSummary {
  rows: CohortRow[];
  counts: CohortCounts;
  exitCode: 0 | 3;
  files: { csv: string; html: string };
}

/**
 * Write cohort.csv and cohort.html (or `<stem>.csv` / `<stem>.html`) into OUT, atomically.
 * @param out - the batch output folder
 * @param options - cases to report (default: every case folder found), file stem (default "cohort")
 */
export function writeCohort(
  out: string,
  options: { cases?: readonly { name: string; index: number }[]; stem?: string } = {},
): CohortSummary {
  const rows = collectRows(out, options.cases);
  const stem = options.stem ?? "cohort";
  const files = { csv: join(out, `${stem}.csv`), html: join(out, `${stem}.html`) };
  writeFileAtomic(files.csv, cohortCsv(rows));
  writeFileAtomic(files.html, cohortHtml(rows, basename(out)));
  return { rows, counts: countRows(rows), exitCode: batchExitCode(rows), files };
}
