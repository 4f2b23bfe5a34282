/**
 * Shards: splitting a manifest's cases over independent runs (e.g. the tasks of a cluster
 * array job) so that together they cover every case exactly once.
 *
 * Shard K of N (1-based K, 1 <= K <= N) takes the cases at 0-based manifest positions
 * p = K-1, K-1+N, K-1+2N, ... (every N-th case starting at the K-th); the N shards partition
 * the cases.
 *
 * `auto` derives K/N from the cluster scheduler's array-task variables (Slurm sets them for
 * every task of an array job, `sbatch --array=A-B[:S]`):
 *   SLURM_ARRAY_TASK_ID (required), SLURM_ARRAY_TASK_MIN, SLURM_ARRAY_TASK_MAX,
 *   SLURM_ARRAY_TASK_STEP (default 1), SLURM_ARRAY_TASK_COUNT.
 * K = (ID - MIN) / STEP + 1, with MIN = 0 when absent; N = COUNT, else (MAX - MIN) / STEP + 1.
 * Ids that do not form such a range (e.g. `--array=1,4,9`) are refused.
 */
import { CoxaError } from "../common/errors.js";

/** Shard K of N (1-based index). */
export interface Shard {
  /** 1-based shard number K. */
  index: number;
  /** Number of shards N (>= 1). */
  count: number;
}

const SPEC = /^\s*(\d+)\s*\/\s*(\d+)\s*$/;

/**
 * Parse "K/N" or "auto".
 * @param spec - shard text
 * @returns the shard, or "auto"
 * @throws CoxaError BAD_ARGUMENT for anything else or K outside 1..N
 */
export function parseShard(spec: string): Shard | "auto" {
  if (spec.trim().toLowerCase() === "auto") return "auto";
  const m = SPEC.exec(spec);
  if (!m) throw new CoxaError("BAD_ARGUMENT", `shard "${spec}" is not K/N (e.g. 1/4) or auto`);
  const index = Number(m[1]);
  const count = Number(m[2]);
  if (!(count >= 1) || !(index >= 1 && index <= count) || !Number.isSafeInteger(count)) {
    throw new CoxaError("BAD_ARGUMENT", `shard "${spec}" needs 1 <= K <= N`);
  }
  return { index, count };
}

function envInteger(env: Readonly<Record<string, string | undefined>>, name: string): number | undefined {
  const raw = env[name];
  if (raw === undefined || raw.trim() === "") return undefined;
  if (!/^\s*-?\d+\s*$/.test(raw)) {
    throw new CoxaError("BAD_ARGUMENT", `environment variable ${name}="${raw}" is not a whole number`);
  }
  return Number(raw);
}

/**
 * The shard of this array task from the scheduler's environment (see the module header).
 * @param env - environment variables (the CLI passes process.env)
 * @throws CoxaError BAD_ARGUMENT when SLURM_ARRAY_TASK_ID is absent (not an array task), when
 *   neither a task count nor a max id is set, or when the ids do not form a regular range
 */
export function shardFromEnvironment(env: Readonly<Record<string, string | undefined>>): Shard {
  const id = envInteger(env, "SLURM_ARRAY_TASK_ID");
  if (id === undefined) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      "--shard auto needs SLURM_ARRAY_TASK_ID (and SLURM_ARRAY_TASK_COUNT or SLURM_ARRAY_TASK_MIN/MAX); this is not a cluster array task — give --shard K/N instead",
    );
  }
  const min = envInteger(env, "SLURM_ARRAY_TASK_MIN") ?? 0;
  const step = envInteger(env, "SLURM_ARRAY_TASK_STEP") ?? 1;
  const max = envInteger(env, "SLURM_ARRAY_TASK_MAX");
  let count = envInteger(env, "SLURM_ARRAY_TASK_COUNT");
  if (!(step >= 1)) throw new CoxaError("BAD_ARGUMENT", `SLURM_ARRAY_TASK_STEP=${step} is not >= 1`);
  if (count === undefined) {
    if (max === undefined) {
      throw new CoxaError(
        "BAD_ARGUMENT",
        "--shard auto needs SLURM_ARRAY_TASK_COUNT or SLURM_ARRAY_TASK_MAX next to SLURM_ARRAY_TASK_ID",
      );
    }
    count = Math.floor((max - min) / step) + 1;
  }
  const offset = id - min;
  const index = offset / step + 1;
  if (!(count >= 1) || !Number.isInteger(index) || index < 1 || index > count) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `array task id ${id} does not fit a range of ${count} tasks starting at ${min} with step ${step}; submit the array as --array=A-B or give --shard K/N`,
    );
  }
  return { index, count };
}

/**
 * The items of shard K of N: positions K-1, K-1+N, ... in order.
 * @param items - all cases in manifest order
 * @param shard - the shard, or undefined for all items
 */
export function selectShard<T>(items: readonly T[], shard: Shard | undefined): T[] {
  if (shard === undefined) return [...items];
  const out: T[] = [];
  for (let p = shard.index - 1; p < items.length; p += shard.count) out.push(items[p]);
  return out;
}

/** "shard-K-of-N" for file names. */
export function shardTag(shard: Shard): string {
  return `shard-${shard.index}-of-${shard.count}`;
}
