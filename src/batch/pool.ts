/**
 * The batch's worker pool: at most `jobs` cases at a time, each in its own child process
 * (node child_process.fork of dist/batch/case-process.js, one fresh process per case).
 *
 * Why processes and not worker threads: a case holds a clinical CT and MR plus pyramids and
 * resampled copies (several GB for the largest inputs); a process per case returns all of it
 * to the system when the case ends, an out-of-memory kill or a crash in one case cannot take
 * the batch or the other cases down (it becomes "failed: crashed ..." for that case alone),
 * and the peak memory of each case is measurable (resourceUsage().maxRSS). Start-up costs
 * about 0.1 s per case, nothing next to a registration. Inside a case, align and the export
 * may still use worker threads (`threads`; 1 per case when jobs > 1, so that 2 cores are not
 * oversubscribed).
 *
 * A child whose parent dies (e.g. the batch is killed with SIGKILL) sees its IPC channel close
 * and exits at once, so no orphan keeps writing into a case that a later --resume redoes.
 */
import { type ChildProcess, fork } from "node:child_process";
import { CoxaError } from "../common/errors.js";
import type { ProgressEvent } from "../common/progress.js";
import { workerScript } from "../common/workers.js";
import type { CaseOutcome, CaseTask } from "./case.js";

/** Messages from a case process to the batch. */
export type CaseProcessMessage =
  | { type: "progress"; name: string; event: ProgressEvent }
  | { type: "result"; outcome: CaseOutcome };

/** Options of runInProcesses. */
export interface ProcessPoolOptions {
  /** Cases at a time (>= 1). */
  jobs: number;
  /** Compiled case script; default dist/batch/case-process.js. */
  script?: URL;
  /** Called when a case starts. */
  onStart?: (task: CaseTask) => void;
  /** Progress inside a case. */
  onCaseProgress?: (name: string, event: ProgressEvent) => void;
  /** Called when a case ends (also for crashes). */
  onOutcome?: (outcome: CaseOutcome) => void;
  /** Called for a crashed case before onOutcome (the batch writes failed.json for it). */
  onCrash?: (task: CaseTask, reason: string) => void;
}

/**
 * Run tasks in child processes, at most `jobs` at a time; outcomes in task order.
 * @param tasks - the cases
 * @param options - jobs, script, callbacks
 * @throws CoxaError INTERNAL when the case script is missing (run "npm run build")
 */
export async function runInProcesses(
  tasks: readonly CaseTask[],
  options: ProcessPoolOptions,
): Promise<CaseOutcome[]> {
  const jobs = Math.max(1, Math.floor(options.jobs));
  const script = options.script ?? workerScript(import.meta.url, "case-process");
  const outcomes: CaseOutcome[] = new Array(tasks.length);
  let next = 0;
  const runOne = (task: CaseTask): Promise<CaseOutcome> =>
    new Promise((resolveOutcome) => {
      const t0 = performance.now();
      let settled = false;
      let child: ChildProcess;
      const finish = (outcome: CaseOutcome) => {
        if (settled) return;
        settled = true;
        resolveOutcome(outcome);
      };
      const crashed = (reason: string) => {
        if (settled) return;
        options.onCrash?.(task, reason);
        finish({
          name: task.name,
          index: task.index,
          status: "failed",
          reason,
          code: "CRASHED",
          seconds: Math.round((performance.now() - t0) / 10) / 100,
          peakRssMb: null,
        });
      };
      try {
        child = fork(script, [], {
          execArgv: [],
          stdio: ["ignore", "ignore", "pipe", "ipc"],
          serialization: "json",
        });
      } catch (err) {
        crashed(`could not start a case process (${(err as Error).message})`);
        return;
      }
      let stderrTail = "";
      child.stderr?.on("data", (chunk: Buffer) => {
        stderrTail = (stderrTail + chunk.toString("utf8")).slice(-2000);
      });
      child.on("message", (m: CaseProcessMessage) => {
        if (m.type === "progress") options.onCaseProgress?.(m.name, m.event);
        else if (m.type === "result") finish(m.outcome);
      });
      child.on("error", (err) => crashed(`case process error (${err.message})`));
      child.on("exit", (code, signal) => {
        if (settled) return;
        const last = stderrTail.trim().split("\n").pop()?.slice(0, 300);
        crashed(
          signal
            ? `crashed (signal ${signal}${signal === "SIGKILL" ? ", possibly out of memory" : ""})`
            : `crashed (exit code ${code}${last ? `: ${last}` : ""})`,
        );
      });
      child.send({ type: "task", task });
    });
  const lane = async () => {
    while (next < tasks.length) {
      const at = next++;
      const task = tasks[at];
      options.onStart?.(task);
      const outcome = await runOne(task);
      outcomes[at] = outcome;
      options.onOutcome?.(outcome);
    }
  };
  if (tasks.length > 0 && !script) throw new CoxaError("INTERNAL", "no case script");
  await Promise.all(Array.from({ length: Math.min(jobs, tasks.length) }, lane));
  return outcomes;
}
