/**
 * Typed errors of the coxa library. The library throws these and never prints or exits;
 * the CLI maps `CoxaError.exitCode` to the process exit code in one place (src/cli/run.ts).
 *
 * Codes are stable strings that tests and other programs may match on.
 */

/** Codes for input that cannot be used (exit code 2). */
export type InputErrorCode =
  | "FILE_MISSING"
  | "FILE_UNREADABLE"
  | "NOT_NIFTI"
  | "TRUNCATED"
  | "BAD_DIMS"
  | "BAD_SPACING"
  | "BAD_AFFINE"
  | "UNSUPPORTED_DATATYPE"
  | "GZIP_BOMB"
  | "TOO_LARGE"
  | "BAD_ARGUMENT"
  | "BAD_TRANSFORM"
  | "BAD_LANDMARKS"
  | "BAD_MASK"
  | "BAD_MANIFEST"
  | "NO_OVERLAP"
  | "WOULD_OVERWRITE"
  | "HASH_MISMATCH"
  | "BAD_INPUT";

/** Codes for failures inside coxa (exit code 1). */
export type InternalErrorCode = "INTERNAL" | "WORKER_FAILED";

export type ErrorCode = InputErrorCode | InternalErrorCode;

const INTERNAL_CODES: ReadonlySet<string> = new Set<InternalErrorCode>(["INTERNAL", "WORKER_FAILED"]);

/** An error with a stable `code`, a one-line message and, when known, the file it concerns. */
export class CoxaError extends Error {
  readonly code: ErrorCode;
  readonly file: string | undefined;

  /**
   * @param code - stable error code
   * @param message - one plain sentence; when `file` is given it is prefixed as "file: message"
   * @param file - path of the file the problem is in, if any
   */
  constructor(code: ErrorCode, message: string, file?: string) {
    super(file ? `${file}: ${message}` : message);
    this.name = "CoxaError";
    this.code = code;
    this.file = file;
  }

  /** Process exit code for this error: 2 for bad input or usage, 1 for internal failures. */
  get exitCode(): 1 | 2 {
    return INTERNAL_CODES.has(this.code) ? 1 : 2;
  }
}

/** Shorthand for a bad-input error. */
export function inputError(code: InputErrorCode, message: string, file?: string): CoxaError {
  return new CoxaError(code, message, file);
}

/** True when `err` is a CoxaError (also across worker-thread boundaries, by shape). */
export function isCoxaError(err: unknown): err is CoxaError {
  return err instanceof CoxaError;
}
