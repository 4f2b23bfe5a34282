/** Where CLI output goes; tests pass their own to capture it. */
export interface CliIo {
  stdout: (text: string) => void;
  stderr: (text: string) => void;
  /** True when stderr is a terminal (progress bars are drawn only then). */
  stderrIsTTY: boolean;
}

export const processIo: CliIo = {
  stdout: (text) => process.stdout.write(text),
  stderr: (text) => process.stderr.write(text),
  stderrIsTTY: Boolean(process.stderr.isTTY),
};
