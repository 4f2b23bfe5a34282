/** Run the coxa CLI in-process and capture its output. */
import { COMMANDS } from "../../src/cli/commands.js";
import type { CliIo } from "../../src/cli/io.js";
import { runCli } from "../../src/cli/run.js";

export interface CliResult {
  code: number;
  stdout: string;
  stderr: string;
}

/** Run `coxa <args>` in this process (commander exitOverride), returning exit code and output. */
export async function runCoxa(args: string[]): Promise<CliResult> {
  let stdout = "";
  let stderr = "";
  const io: CliIo = {
    stdout: (t) => {
      stdout += t;
    },
    stderr: (t) => {
      stderr += t;
    },
    stderrIsTTY: false,
  };
  const code = await runCli(args, COMMANDS, io);
  return { code, stdout, stderr };
}
