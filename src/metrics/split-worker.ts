/**
 * Helper thread of a split histogram metric (split.ts): a message with a `kind` is a pyramid
 * pass to share (src/pyramid/parallel.ts); otherwise, after a setup message it loops on a
 * shared control block, accumulating its share of the samples into its own joint histogram
 * each time the main thread bumps the request counter, until told to leave the loop.
 *
 * Control block (Int32Array on a SharedArrayBuffer): see split.ts.
 */
import { parentPort } from "node:worker_threads";
import { runHelperShare, type SharedKernel } from "../pyramid/parallel.js";
import { accumulateJoint } from "./joint-histogram.js";
import { CMD, DONE, HELPER_COUNTED, READY, SEQ, type SplitSetup } from "./split-protocol.js";

if (!parentPort) throw new Error("split-worker must run in a worker thread");

parentPort.on("message", (message: SplitSetup | SharedKernel) => {
  if ("kind" in message) {
    runHelperShare(message);
    return;
  }
  const setup = message;
  const ctrl = new Int32Array(setup.control);
  const matrix = new Float64Array(setup.matrix);
  const joint = new Float64Array(setup.joint);
  let last = Atomics.load(ctrl, SEQ);
  Atomics.store(ctrl, READY, 1);
  Atomics.notify(ctrl, READY);
  for (;;) {
    Atomics.wait(ctrl, SEQ, last);
    const seq = Atomics.load(ctrl, SEQ);
    if (seq === last) continue;
    last = seq;
    if (Atomics.load(ctrl, CMD) === 2) break;
    const counted = accumulateJoint(
      joint,
      setup.fixedBin,
      setup.bins,
      setup.scale,
      setup.offset,
      setup.box,
      setup.world,
      setup.start,
      setup.end,
      setup.data,
      setup.bits,
      setup.dims[0],
      setup.dims[1],
      setup.dims[2],
      matrix,
    );
    Atomics.store(ctrl, HELPER_COUNTED, counted);
    Atomics.store(ctrl, DONE, seq);
    Atomics.notify(ctrl, DONE);
  }
  Atomics.store(ctrl, DONE, Atomics.load(ctrl, SEQ));
  Atomics.notify(ctrl, DONE);
  Atomics.store(ctrl, READY, 0);
  Atomics.notify(ctrl, READY);
});
