/**
 * Running the CLI in-process: builds the program, parses argv, maps outcomes to exit codes in
 * one place (design.md): 0 done, 2 bad input or usage, 3 quality gates failed, 1 internal error.
 */
import { Command, CommanderError } from "commander";
import { isCoxaError } from "../common/errors.js";
import { softwareVersion } from "../common/version.js";
import { type CliIo, processIo } from "./io.js";

/** State shared by the command actions of one CLI run. */
export interface CliContext {
  io: CliIo;
  /** Exit code the action decided (0 or 3); errors set theirs in runCli. */
  exitCode: number;
}

export type CommandFactory = (ctx: CliContext) => Command;

/**
 * Parse `argv` (without node and script) and run the command.
 * @returns the process exit code
 */
export async function runCli(
  argv: string[],
  factories: CommandFactory[],
  io: CliIo = processIo,
): Promise<number> {
  const ctx: CliContext = { io, exitCode: 0 };
  const program = new Command("coxa")
    .description("Metal-aware registration of hip MR to CT, with quality gates and training exports.")
    .version(softwareVersion(), "-V, --version")
    .showHelpAfterError("(run with --help for usage)")
    .configureOutput({ writeOut: io.stdout, writeErr: io.stderr })
    .exitOverride();
  for (const make of factories) {
    const cmd = make(ctx);
    cmd
      .configureOutput({ writeOut: io.stdout, writeErr: io.stderr })
      .exitOverride()
      .showHelpAfterError("(run with --help for usage)");
    program.addCommand(cmd);
  }
  try {
    await program.parseAsync(argv, { from: "user" });
    return ctx.exitCode;
  } catch (err) {
    if (err instanceof CommanderError) {
      if (
        err.code === "commander.helpDisplayed" ||
        err.code === "commander.version" ||
        err.code === "commander.help"
      )
        return 0;
      if (err.code === "commander.executeSubCommandAsync") return 1;
      return 2;
    }
    if (isCoxaError(err)) {
      io.stderr(`coxa: ${err.message}\n`);
      return err.exitCode;
    }
    io.stderr(`coxa: internal error: ${(err as Error)?.stack ?? String(err)}\n`);
    return 1;
  }
}
