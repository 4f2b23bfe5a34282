/**
 * Worker thread that inflates one gzip stream (src/image/inflate.ts): the whole inflation runs
 * here, so it goes on at full speed while the main thread is busy (Node's asynchronous gunzip
 * needs the main thread between every 16 KB chunk).
 */
import { parentPort, workerData } from "node:worker_threads";
import { gunzipSync } from "node:zlib";

const { input, maxOutputLength, chunkSize } = workerData as {
  input: ArrayBuffer;
  maxOutputLength: number;
  chunkSize?: number;
};
try {
  const out = gunzipSync(new Uint8Array(input), { maxOutputLength, ...(chunkSize ? { chunkSize } : {}) });
  // A large output Buffer starts its own ArrayBuffer (the one chunk zlib filled, perhaps with
  // unused room at the end): send that without copying, with the length used.
  const own = out.byteOffset === 0 && out.buffer.byteLength >= 1 << 16;
  const buffer = own
    ? (out.buffer as ArrayBuffer)
    : out.buffer.slice(out.byteOffset, out.byteOffset + out.byteLength);
  const inflatedAtMs = performance.timeOrigin + performance.now();
  parentPort!.postMessage({ ok: true, buffer, length: out.byteLength, inflatedAtMs }, [
    buffer as ArrayBuffer,
  ]);
} catch (err) {
  const e = err as NodeJS.ErrnoException;
  parentPort!.postMessage({ ok: false, name: e.name, code: e.code, message: e.message });
}
