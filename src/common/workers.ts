/**
 * Worker threads for work that splits (resampling slabs, stress trials, batch cases).
 *
 * A worker script calls `serveTasks(handler)`; the main thread creates a `WorkerPool` over
 * that script and `run`s tasks on it. Errors thrown in a worker come back as the same
 * CoxaError code and message. Big arrays should travel as SharedArrayBuffer-backed typed
 * arrays (shared, not copied) or be listed in `transfer`.
 *
 * Worker scripts run as compiled JavaScript from dist/ (vitest runs the TypeScript sources, so
 * `workerScript` maps src/...ts to dist/...js; `npm test` builds first).
 */
import { existsSync } from "node:fs";
import { availableParallelism } from "node:os";
import { fileURLToPath, pathToFileURL } from "node:url";
import { isMainThread, parentPort, type TransferListItem, Worker } from "node:worker_threads";
import { CoxaError, type ErrorCode } from "./errors.js";

interface TaskMessage {
  id: number;
  task: unknown;
}

interface ResultMessage {
  id: number;
  ok: boolean;
  result?: unknown;
  error?: { code?: string; message: string; file?: string; stack?: string };
}

/**
 * URL of the compiled worker script next to `moduleUrl`.
 * @param moduleUrl - `import.meta.url` of the module that owns the worker
 * @param name - worker file name without extension, e.g. "resample-worker"
 */
export function workerScript(moduleUrl: string, name: string): URL {
  const here = fileURLToPath(moduleUrl);
  let path = here.replace(/[^/\\]+$/, `${name}.js`);
  if (here.endsWith(".ts")) {
    path = path.replace(/([/\\])src([/\\])(?!.*[/\\]src[/\\])/, "$1dist$2");
    if (!existsSync(path)) {
      throw new CoxaError("INTERNAL", `worker script ${path} is missing; run "npm run build" first`);
    }
  }
  return pathToFileURL(path);
}

/** Default worker count: the machine's available parallelism. */
export function defaultThreads(): number {
  return Math.max(1, availableParallelism());
}

/**
 * Images from this many voxels on are worth several threads. Below it, starting the helper and
 * pool threads (each compiles its hot code afresh) costs more than sharing saves: measured with
 * `npm run bench` on 2 cores, 8 demo-size cases (CT 160x160x96) took 1.68 s each on one thread
 * and 2.11 s with two.
 */
export const PARALLEL_MIN_VOXELS = 8_000_000;

/** Threads for work on an image of `voxels` voxels: all cores from PARALLEL_MIN_VOXELS on, else 1. */
export function threadsFor(voxels: number): number {
  return voxels >= PARALLEL_MIN_VOXELS ? defaultThreads() : 1;
}

/** A fixed set of worker threads running tasks from a queue. */
export class WorkerPool {
  private readonly workers: Worker[] = [];
  private readonly idle: Worker[] = [];
  private readonly queue: { msg: TaskMessage; transfer: readonly TransferListItem[] }[] = [];
  private readonly pending = new Map<
    number,
    { resolve: (v: unknown) => void; reject: (e: unknown) => void; worker?: Worker }
  >();
  private nextId = 1;
  private closed = false;

  /**
   * @param script - compiled worker script (see workerScript)
   * @param size - number of threads (>= 1)
   * @param workerData - passed to every worker as `workerData`
   */
  constructor(script: URL, size: number, workerData?: unknown) {
    for (let i = 0; i < Math.max(1, size); i++) {
      const worker = new Worker(script, { workerData });
      worker.on("message", (m: ResultMessage) => this.onMessage(worker, m));
      worker.on("error", (err) => this.onWorkerError(worker, err));
      worker.unref();
      this.workers.push(worker);
      this.idle.push(worker);
    }
  }

  get size(): number {
    return this.workers.length;
  }

  /** Run one task; resolves with the worker's result. */
  run<R>(task: unknown, transfer: readonly TransferListItem[] = []): Promise<R> {
    if (this.closed) return Promise.reject(new CoxaError("INTERNAL", "worker pool is closed"));
    const id = this.nextId++;
    const promise = new Promise<R>((resolve, reject) => {
      this.pending.set(id, { resolve: resolve as (v: unknown) => void, reject });
    });
    this.queue.push({ msg: { id, task }, transfer });
    this.pump();
    return promise;
  }

  /** Run tasks, at most `size` at a time; results in task order. */
  runAll<R>(tasks: readonly unknown[]): Promise<R[]> {
    return Promise.all(tasks.map((t) => this.run<R>(t)));
  }

  /** Stop all threads. */
  async close(): Promise<void> {
    this.closed = true;
    await Promise.all(this.workers.map((w) => w.terminate()));
  }

  private pump(): void {
    while (this.idle.length > 0 && this.queue.length > 0) {
      const worker = this.idle.pop()!;
      const item = this.queue.shift()!;
      const entry = this.pending.get(item.msg.id);
      if (entry) entry.worker = worker;
      worker.ref();
      worker.postMessage(item.msg, item.transfer as TransferListItem[]);
    }
  }

  private onMessage(worker: Worker, m: ResultMessage): void {
    const entry = this.pending.get(m.id);
    this.pending.delete(m.id);
    worker.unref();
    this.idle.push(worker);
    if (entry) {
      if (m.ok) entry.resolve(m.result);
      else entry.reject(reviveError(m.error));
    }
    this.pump();
  }

  private onWorkerError(worker: Worker, err: Error): void {
    for (const [id, entry] of this.pending) {
      if (entry.worker === worker) {
        this.pending.delete(id);
        entry.reject(new CoxaError("WORKER_FAILED", `worker thread failed: ${err.message}`));
      }
    }
  }
}

function reviveError(e: ResultMessage["error"]): Error {
  if (e?.code) return new CoxaError(e.code as ErrorCode, e.message);
  const err = new Error(e?.message ?? "worker task failed");
  if (e?.stack) err.stack = e.stack;
  return err;
}

/**
 * Inside a worker script: answer tasks with `handler`. Throwing a CoxaError sends its code and
 * message back to the caller.
 */
export function serveTasks(handler: (task: never) => unknown | Promise<unknown>): void {
  if (isMainThread || !parentPort)
    throw new CoxaError("INTERNAL", "serveTasks must run inside a worker thread");
  const port = parentPort;
  port.on("message", async (m: TaskMessage) => {
    try {
      const result = await handler(m.task as never);
      port.postMessage({ id: m.id, ok: true, result } satisfies ResultMessage);
    } catch (err) {
      const error =
        err instanceof CoxaError
          ? { code: err.code, message: err.message }
          : { message: (err as Error)?.message ?? String(err), stack: (err as Error)?.stack };
      port.postMessage({ id: m.id, ok: false, error } satisfies ResultMessage);
    }
  });
}
