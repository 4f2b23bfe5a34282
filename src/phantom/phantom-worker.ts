/**
 * Worker thread of the phantom: rasterises slabs of slices into shared buffers and computes the
 * CT metal artifact of single slices. Runs as compiled JavaScript from dist/ (see common/workers.ts).
 */
import { serveTasks } from "../common/workers.js";
import { type SliceArtifactInput, sliceMetalArtifact } from "./ct-artifacts.js";
import { type RenderJob, renderStructures } from "./render.js";

/** A task for the phantom worker: one CT slice's artifact, or one slab of rasterising. */
export type PhantomTask =
  | { kind: "ct-slice"; input: SliceArtifactInput }
  | { kind: "render"; job: RenderJob };

serveTasks((task: PhantomTask) => {
  if (task.kind === "ct-slice") return sliceMetalArtifact(task.input);
  renderStructures(task.job);
  return null;
});
