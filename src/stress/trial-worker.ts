/**
 * Worker thread of `coxa stress`: runs one trial (./trial.ts) per task. Runs as compiled
 * JavaScript from dist/ (see src/common/workers.ts). The images arrive as SharedArrayBuffer-backed
 * arrays, shared with the main thread, not copied.
 */
import { serveTasks } from "../common/workers.js";
import { runTrial, type TrialTask } from "./trial.js";

serveTasks((task: TrialTask) => runTrial(task));
