/**
 * Worker thread for resampleOnto (src/resample/resample.ts): runs slab jobs and B-spline
 * prefilter passes on SharedArrayBuffer-backed arrays handed over by the main thread.
 */
import { sharedView } from "../common/shared-arrays.js";
import { serveTasks } from "../common/workers.js";
import { bsplinePrefilter } from "./kernels.js";
import type { WorkerPrefilterTask, WorkerSlabTask } from "./resample.js";
import { resampleSlab } from "./slab.js";

serveTasks((task: WorkerSlabTask | WorkerPrefilterTask) => {
  if (task.kind === "prefilter") {
    const c = new Float64Array(task.coeffs.buffer, 0, task.coeffs.length);
    bsplinePrefilter(c, c, task.dims, { axes: task.axes, kRange: task.kRange, jRange: task.jRange });
    return 0;
  }
  const { src, out, ...rest } = task.job;
  return resampleSlab({
    ...rest,
    src: sharedView(src.datatype, src.buffer, 0, src.length),
    out: sharedView(out.datatype, out.buffer, 0, out.length),
  });
});
