/**
 * A one-line progress bar on stderr, drawn only on a terminal and never with --quiet/--json.
 * Redraws at most 10 times a second; `done()` clears the line.
 */
import type { ProgressEvent, ProgressFn } from "../common/progress.js";
import type { CliIo } from "./io.js";

export interface ProgressBar {
  update: ProgressFn;
  done: () => void;
}

const WIDTH = 28;

/** A bar for `io`; a silent one when `enabled` is false or stderr is not a terminal. */
export function createProgressBar(io: CliIo, enabled: boolean): ProgressBar {
  if (!enabled || !io.stderrIsTTY) return { update: () => {}, done: () => {} };
  let last = 0;
  let drawn = false;
  const draw = (e: ProgressEvent) => {
    const now = Date.now();
    if (now - last < 100 && e.fraction !== 1) return;
    last = now;
    const f = Math.max(0, Math.min(1, e.fraction ?? 0));
    const filled = Math.round(f * WIDTH);
    const bar = `${"█".repeat(filled)}${"░".repeat(WIDTH - filled)}`;
    const metric = e.metric !== undefined ? `  metric ${e.metric.toFixed(4)}` : "";
    const msg = e.message ? `  ${e.message}` : "";
    io.stderr(`\r\x1b[2K${bar} ${(100 * f).toFixed(0).padStart(3)}%  ${e.stage}${metric}${msg}`);
    drawn = true;
  };
  return {
    update: draw,
    done: () => {
      if (drawn) io.stderr("\r\x1b[2K");
      drawn = false;
    },
  };
}
