/**
 * Worker thread that inflates one gzip stream (src/image/inflate.ts): the whole inflation runs
 * here, so it goes on at full speed while the main thread is busy (Node's asynchronous gunzip
 * needs the main thread between every 16 KB chunk).
 */
import { parentPort, workerData } from "node:worker_threads";
import { gunzipSync } from "node:zlib";

const { input, maxOutputLength } = workerData as { input: ArrayBuffer; maxOutputLength: number };
try {
  const out = gunzipSync(new Uint8Array(input), { maxOutputLength });
  // A large output Buffer owns its ArrayBuffer; send it without copying.
  const whole = out.byteOffset === 0 && out.byteLength === out.buffer.byteLength;
  const buffer = whole
    ? (out.buffer as ArrayBuffer)
    : out.buffer.slice(out.byteOffset, out.byteOffset + out.byteLength);
  parentPort!.postMessage({ ok: true, buffer }, [buffer as ArrayBuffer]);
} catch (err) {
  const e = err as NodeJS.ErrnoException;
  parentPort!.postMessage({ ok: false, name: e.name, code: e.code, message: e.message });
}
