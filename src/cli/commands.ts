/** The list of coxa's commands, in the order `--help` shows them. */
import { alignCommand } from "./align.js";
import { batchCommand } from "./batch.js";
import { infoCommand } from "./info.js";
import { landmarksCommand } from "./landmarks.js";
import { pairCommand } from "./pair.js";
import { phantomCommand } from "./phantom.js";
import { resampleCommand } from "./resample.js";
import type { CommandFactory } from "./run.js";
import { stressCommand } from "./stress.js";

export const COMMANDS: CommandFactory[] = [
  infoCommand,
  phantomCommand,
  alignCommand,
  resampleCommand,
  landmarksCommand,
  pairCommand,
  batchCommand,
  stressCommand,
];
