/**
 * Two-thread evaluation of the histogram metrics: the samples are split in two, the main thread
 * accumulates the first part while a helper thread (split-worker.ts) does the second, and the
 * two joint histograms are added. One helper serves one metric at a time; binding another metric
 * releases the previous one. Everything the helper reads lives on SharedArrayBuffers (copied
 * there once per array); requests and answers go through a small shared control block with
 * Atomics.wait/notify, so an evaluation costs microseconds of synchronisation, not messages.
 *
 * Used for large sample sets only (the finest levels); small ones are faster on one thread.
 */
import { Worker } from "node:worker_threads";
import { CoxaError } from "../common/errors.js";
import { workerScript } from "../common/workers.js";
import { type SharedKernel, type WorkSharer, waitForHelper } from "../pyramid/parallel.js";
import { CMD, CONTROL_SLOTS, DONE, HELPER_COUNTED, READY, SEQ, type SplitSetup } from "./split-protocol.js";

/**
 * A helper thread for split metric evaluation; between metrics it also takes a share of the
 * pyramid's big passes (src/pyramid/parallel.ts).
 */
export class MetricSplitter implements WorkSharer {
  private readonly worker: Worker;
  private readonly controlBuffer = new SharedArrayBuffer(4 * CONTROL_SLOTS);
  private readonly ctrl = new Int32Array(this.controlBuffer);
  private readonly matrixBuffer = new SharedArrayBuffer(8 * 16);
  readonly matrix = new Float64Array(this.matrixBuffer);
  private bound: object | undefined;
  private failed: Error | undefined;
  private readonly shared = new WeakMap<object, ArrayBufferView>();
  /** Smallest sample set worth splitting. */
  readonly minSamples: number;
  /** Smallest moving image (voxels) worth splitting for. */
  readonly minMovingVoxels: number;

  constructor(minSamples = 16000, minMovingVoxels = 4_000_000) {
    this.minSamples = minSamples;
    this.minMovingVoxels = minMovingVoxels;
    this.worker = new Worker(workerScript(import.meta.url, "split-worker"));
    this.worker.on("error", (err) => {
      this.failed = err;
    });
    this.worker.unref();
  }

  /** A copy of `a` on a SharedArrayBuffer (cached per source array). */
  sharedCopy<T extends Float32Array | Float64Array | Int32Array | Uint8Array>(a: T): T {
    if (a.buffer instanceof SharedArrayBuffer) return a;
    const hit = this.shared.get(a);
    if (hit) return hit as T;
    const Ctor = a.constructor as new (buf: SharedArrayBuffer) => T;
    const out = new Ctor(new SharedArrayBuffer(a.byteLength));
    out.set(a as never);
    this.shared.set(a, out);
    return out;
  }

  /**
   * Bind the helper to one metric (by `owner`), giving it the second part of the samples.
   * @returns the helper's joint histogram (read after each `finish`)
   */
  bind(owner: object, setup: Omit<SplitSetup, "control" | "matrix" | "joint">): Float64Array {
    this.release();
    const joint = new SharedArrayBuffer(8 * setup.bins * setup.bins);
    this.worker.postMessage({
      ...setup,
      control: this.controlBuffer,
      matrix: this.matrixBuffer,
      joint,
    } satisfies SplitSetup);
    this.waitFor(READY, 0, 1);
    this.bound = owner;
    return new Float64Array(joint);
  }

  /** Let the helper run its share of `task`; the returned function waits until it is done. */
  share(task: SharedKernel): () => void {
    this.release();
    this.worker.postMessage(task);
    return () => waitForHelper(task.control, () => this.failed);
  }

  /** Whether the helper currently serves `owner`. */
  serves(owner: object): boolean {
    return this.bound === owner;
  }

  /** Start the helper's part for the matrix now in `this.matrix`. */
  start(): number {
    Atomics.store(this.ctrl, CMD, 1);
    const seq = Atomics.add(this.ctrl, SEQ, 1) + 1;
    Atomics.notify(this.ctrl, SEQ);
    return seq;
  }

  /** Wait for request `seq`; returns the helper's counted samples. */
  finish(seq: number): number {
    for (;;) {
      // Wait on the value just seen: if the helper finishes in between, wait returns at once.
      const seen = Atomics.load(this.ctrl, DONE);
      if (seen === seq) break;
      const r = Atomics.wait(this.ctrl, DONE, seen, 10_000);
      if (this.failed)
        throw new CoxaError("WORKER_FAILED", `metric helper thread failed: ${this.failed.message}`);
      if (r === "timed-out" && Atomics.load(this.ctrl, DONE) !== seq) {
        throw new CoxaError("WORKER_FAILED", "metric helper thread did not answer within 10 s");
      }
    }
    return Atomics.load(this.ctrl, HELPER_COUNTED);
  }

  /** Let the helper leave its loop (it then waits for the next binding). */
  release(): void {
    if (!this.bound) return;
    Atomics.store(this.ctrl, CMD, 2);
    Atomics.add(this.ctrl, SEQ, 1);
    Atomics.notify(this.ctrl, SEQ);
    this.waitFor(READY, 1, 0);
    this.bound = undefined;
  }

  /** Stop the helper thread (the returned promise settles when it has exited). */
  close(): Promise<number> {
    this.release();
    return this.worker.terminate();
  }

  private waitFor(slot: number, from: number, to: number): void {
    const t0 = Date.now();
    while (Atomics.load(this.ctrl, slot) !== to) {
      Atomics.wait(this.ctrl, slot, from, 1000);
      if (this.failed)
        throw new CoxaError("WORKER_FAILED", `metric helper thread failed: ${this.failed.message}`);
      if (Date.now() - t0 > 30_000)
        throw new CoxaError("WORKER_FAILED", "metric helper thread did not start");
    }
  }
}
