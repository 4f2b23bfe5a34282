/**
 * gzip inflation on a worker thread of its own, for large files (src/image/inflate-worker.ts).
 * The result and the errors are those of zlib's gunzip: a RangeError (code
 * ERR_BUFFER_TOO_LARGE) past `maxOutputLength`, Z_BUF_ERROR for a truncated stream, Z_DATA_ERROR
 * for a corrupt one.
 */
import { Worker } from "node:worker_threads";
import { workerScript } from "../common/workers.js";

/**
 * Inflate `input` (a whole gzip stream) on a new worker thread.
 * @param input - compressed bytes; its memory is handed to the worker (do not use it after)
 * @param limits - maxOutputLength: refuse to inflate beyond this many bytes; chunkSize: zlib's
 *   output chunk (one chunk as large as the expected output avoids joining chunks at the end)
 * @returns the bytes, and when the worker finished inflating them (epoch ms: the main thread may
 *   take the message later, when it is busy)
 */
export function inflateInWorker(
  input: Uint8Array,
  limits: { maxOutputLength: number; chunkSize?: number },
): Promise<{ bytes: Uint8Array; inflatedAtMs: number }> {
  const whole = input.byteOffset === 0 && input.byteLength === input.buffer.byteLength;
  const buffer = whole
    ? (input.buffer as ArrayBuffer)
    : (input.buffer.slice(input.byteOffset, input.byteOffset + input.byteLength) as ArrayBuffer);
  return new Promise((resolve, reject) => {
    const worker = new Worker(workerScript(import.meta.url, "inflate-worker"), {
      workerData: { input: buffer, ...limits },
      transferList: [buffer],
    });
    let settled = false;
    worker.once(
      "message",
      (m: {
        ok: boolean;
        buffer?: ArrayBuffer;
        length?: number;
        inflatedAtMs?: number;
        name?: string;
        code?: string;
        message?: string;
      }) => {
        settled = true;
        if (m.ok) resolve({ bytes: new Uint8Array(m.buffer!, 0, m.length), inflatedAtMs: m.inflatedAtMs! });
        else {
          const err = m.name === "RangeError" ? new RangeError(m.message) : new Error(m.message);
          Object.assign(err, { code: m.code });
          reject(err);
        }
        void worker.terminate();
      },
    );
    worker.once("error", (err) => {
      if (!settled) reject(err);
    });
    worker.once("exit", (code) => {
      if (!settled) reject(new Error(`inflate worker exited with code ${code}`));
    });
  });
}
