/** The list of coxa's commands, in the order `--help` shows them. */
import { infoCommand } from "./info.js";
import type { CommandFactory } from "./run.js";

export const COMMANDS: CommandFactory[] = [infoCommand];
