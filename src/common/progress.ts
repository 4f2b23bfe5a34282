/**
 * Progress reporting. Long library calls accept an optional `onProgress` callback; the CLI
 * turns the events into a bar on stderr (src/cli/progress.ts). The library never prints.
 */

/** One progress event. `fraction` is the share of the named stage that is done (0..1). */
export interface ProgressEvent {
  /** Stage name shown to the user, e.g. "read", "level 2/3", "resample". */
  stage: string;
  /** Share of the stage done, 0..1, when known. */
  fraction?: number;
  /** Pyramid level index (0 = coarsest) during registration. */
  level?: number;
  /** Optimiser iteration (function evaluation count) during registration. */
  iteration?: number;
  /** Current metric value (lower is better) during registration. */
  metric?: number;
  /** Free text, e.g. a case name in a batch. */
  message?: string;
}

export type ProgressFn = (event: ProgressEvent) => void;

/** A callback that does nothing, for callers that want no progress. */
export const noProgress: ProgressFn = () => {};
