/**
 * Parallel gzip: the input is cut into chunks that are compressed at the same time on the libuv
 * thread pool and written as consecutive gzip members. A file of several members is one valid
 * gzip stream (RFC 1952, section 2.2: "a gzip file consists of a series of members"); zlib's
 * gzread, Python's gzip module and Node's gunzip all read it as the concatenated data.
 */
import { promisify } from "node:util";
import { gzip } from "node:zlib";

const gzipAsync = promisify(gzip) as (buf: Uint8Array, opts: { level: number }) => Promise<Buffer>;

/** Chunk size: large enough that members add negligible overhead (~20 bytes each). */
export const GZIP_CHUNK_BYTES = 8 * 1024 * 1024;

/**
 * gzip `data` as one member per chunk, chunks compressed concurrently.
 * @param data - bytes to compress
 * @param level - zlib level 0-9
 * @returns the members in order (write them one after the other)
 */
export async function gzipMembers(
  data: Uint8Array,
  level = 6,
  chunkBytes = GZIP_CHUNK_BYTES,
): Promise<Buffer[]> {
  const parts: Promise<Buffer>[] = [];
  for (let off = 0; off < data.length || off === 0; off += chunkBytes) {
    parts.push(gzipAsync(data.subarray(off, Math.min(data.length, off + chunkBytes)), { level }));
    if (data.length === 0) break;
  }
  return Promise.all(parts);
}
