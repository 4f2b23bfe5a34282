/**
 * Summaries of stress rows: success rate and error statistics per severity and mode, the
 * one-line conclusion, and stress.csv.
 *
 * stress.csv: header exactly `severity,trial,offset_mm,offset_deg,mask,error_mm,success,seconds,verdict`,
 * one row per trial and mode, ordered by severity (ascending), trial, then mask `on` before
 * `off`; `success` is 1 when error_mm <= the success threshold, else 0. Numbers are written with
 * fixed decimals (offsets 3, error 4, seconds 2); stress.json keeps full precision. `seconds` is
 * wall time and differs between runs; every other column is reproduced exactly by the same seed.
 * Median: the middle value, or the mean of the two middle values (common definition).
 */
import type { Verdict } from "../register/quality.js";

/** Metal mask mode of a trial. */
export type MaskMode = "on" | "off";

/** The two modes in row order. */
export const MASK_MODES: readonly MaskMode[] = ["on", "off"];

/** One trial in one mode (a csv row plus what stress.json adds). */
export interface StressRow {
  severity: number;
  trial: number;
  /** Translation magnitude of the starting perturbation, mm. */
  offset_mm: number;
  /** Rotation angle of the starting perturbation, degrees. */
  offset_deg: number;
  mask: MaskMode;
  /** Error of the result against the reference, mm (see error.ts). */
  error_mm: number;
  success: 0 | 1;
  /** Registration wall time, s. */
  seconds: number;
  verdict: Verdict;
  /** Error of the starting pose against the reference, mm (same definition). */
  start_error_mm: number;
  /** The starting transform T_ref · P, fixed -> moving, 4 rows of 4. */
  start_fixed_to_moving: number[][];
  /** Quality-gate findings behind the verdict. */
  reasons: string[];
  /** Transform file, relative to the output folder. */
  transform: string;
  /** Why the registration could not run, else null. */
  failure: string | null;
}

/** Statistics of one severity and mode. */
export interface ModeStats {
  trials: number;
  successes: number;
  /** successes / trials (0 when there are no trials). */
  success_rate: number;
  median_error_mm: number | null;
  max_error_mm: number | null;
  /** Verdict counts. */
  verdicts: Record<Verdict, number>;
}

/** The success rate that counts as "survives" in the conclusion (from the issue). */
export const SURVIVAL_RATE = 0.95;

/** The csv header (exact). */
export const CSV_HEADER = "severity,trial,offset_mm,offset_deg,mask,error_mm,success,seconds,verdict";

/**
 * Median of values (null for none).
 * @param values - finite numbers
 */
export function median(values: readonly number[]): number | null {
  if (values.length === 0) return null;
  const s = [...values].sort((a, b) => a - b);
  const mid = s.length >> 1;
  return s.length % 2 === 1 ? s[mid] : (s[mid - 1] + s[mid]) / 2;
}

/**
 * Statistics of the rows of one severity and mode.
 * @param rows - all rows
 * @param severity - severity to select
 * @param mode - mask mode to select
 */
export function modeStats(rows: readonly StressRow[], severity: number, mode: MaskMode): ModeStats {
  const sel = rows.filter((r) => r.severity === severity && r.mask === mode);
  const errors = sel.map((r) => r.error_mm);
  const successes = sel.reduce((n, r) => n + r.success, 0);
  const verdicts: Record<Verdict, number> = { pass: 0, review: 0, fail: 0 };
  for (const r of sel) verdicts[r.verdict]++;
  return {
    trials: sel.length,
    successes,
    success_rate: sel.length > 0 ? successes / sel.length : 0,
    median_error_mm: median(errors),
    max_error_mm: errors.length > 0 ? Math.max(...errors) : null,
    verdicts,
  };
}

/** The conclusion: per mode, the largest severity at which >= 95% of trials succeeded. */
export interface StressConclusion {
  /** Largest tested severity with success rate >= SURVIVAL_RATE, per mode (null: none). */
  largest_severity: Record<MaskMode, number | null>;
  /** Tested severities below that one whose success rate fell short, per mode. */
  shortfalls_below: Record<MaskMode, number[]>;
  /** One line for people. */
  text: string;
}

/**
 * The conclusion over severities (ascending) and their per-mode statistics.
 * @param severities - tested severities, ascending
 * @param stats - statistics per severity index and mode
 * @param successMm - the success threshold, for the sentence
 */
export function concludeStress(
  severities: readonly number[],
  stats: readonly Record<MaskMode, ModeStats>[],
  successMm: number,
): StressConclusion {
  const largest: Record<MaskMode, number | null> = { on: null, off: null };
  const shortfalls: Record<MaskMode, number[]> = { on: [], off: [] };
  for (const mode of MASK_MODES) {
    let best = -1;
    for (let i = 0; i < severities.length; i++) {
      if (stats[i][mode].trials > 0 && stats[i][mode].success_rate >= SURVIVAL_RATE) best = i;
    }
    if (best >= 0) {
      largest[mode] = severities[best];
      for (let i = 0; i < best; i++) {
        if (!(stats[i][mode].success_rate >= SURVIVAL_RATE)) shortfalls[mode].push(severities[i]);
      }
    }
  }
  const part = (mode: MaskMode, label: string) => {
    const s = largest[mode];
    if (s === null) return `${label}: at no tested severity`;
    const tail =
      shortfalls[mode].length > 0 ? ` (but not at ${shortfalls[mode].map(formatSeverity).join(", ")})` : "";
    return `${label}: up to severity ${formatSeverity(s)}${tail}`;
  };
  const text =
    `Largest severity at which at least ${Math.round(SURVIVAL_RATE * 100)}% of trials came within ${successMm} mm of the reference — ` +
    `${part("on", "metal mask on")}; ${part("off", "metal mask off")}.`;
  return { largest_severity: largest, shortfalls_below: shortfalls, text };
}

/** A severity as text for files and tables: the shortest decimal that reads back the same ("0.25", "1"). */
export function formatSeverity(severity: number): string {
  return String(severity);
}

/** The trial transform's file name, relative to the output folder. */
export function trialFileName(severity: number, trial: number, mode: MaskMode): string {
  return `trials/${formatSeverity(severity)}-${trial}-${mode}.json`;
}

/**
 * stress.csv text (header and rows in the given order; trailing newline).
 * @param rows - rows in output order
 */
export function stressCsv(rows: readonly StressRow[]): string {
  const lines = [CSV_HEADER];
  for (const r of rows) {
    lines.push(
      [
        formatSeverity(r.severity),
        String(r.trial),
        r.offset_mm.toFixed(3),
        r.offset_deg.toFixed(3),
        r.mask,
        r.error_mm.toFixed(4),
        String(r.success),
        r.seconds.toFixed(2),
        r.verdict,
      ].join(","),
    );
  }
  return `${lines.join("\n")}\n`;
}
