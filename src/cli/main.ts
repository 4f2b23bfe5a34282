#!/usr/bin/env node
/** The `coxa` binary: assembles the commands and sets the exit code. */
import { COMMANDS } from "./commands.js";
import { runCli } from "./run.js";

process.exitCode = await runCli(process.argv.slice(2), COMMANDS);
