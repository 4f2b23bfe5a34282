/**
 * Parallel gzip: the input is cut into chunks that are compressed at the same time on the libuv
 * thread pool and written as consecutive gzip members. A file of several members is one valid
 * gzip stream (RFC 1952, section 2.2: "a gzip file consists of a series of members"); zlib's
 * gzread, Python's gzip module and Node's gunzip all read it as the concatenated data.
 */
import { promisify } from "node:util";
import { gzip } from "node:zlib";

const gzipAsync = promisify(gzip) as (
  buf: Uint8Array,
  opts: { level: number; chunkSize: number },
) => Promise<Buffer>;

/**
 * zlib output chunk for compressing `n` bytes: room for the worst case (deflate's stored blocks
 * add 5 bytes per 16 KiB, gzip 18 bytes of header and trailer), so that each member comes out
 * in one chunk and is not joined from 16 KiB pieces afterwards.
 */
function outputChunk(n: number): number {
  return Math.max(64, n + (n >>> 9) + 1024);
}

/** Chunk size: large enough that members add negligible overhead (~20 bytes each). */
export const GZIP_CHUNK_BYTES = 8 * 1024 * 1024;

/**
 * gzip `data` as one member per chunk, chunks compressed concurrently. `data` may be several
 * pieces, compressed as if they were one buffer (same members, byte for byte): a chunk that lies
 * within one piece is compressed from it in place, only a chunk that spans two is copied.
 * @param data - bytes to compress, one buffer or several in order
 * @param level - zlib level 0-9
 * @returns the members in order (write them one after the other)
 */
export async function gzipMembers(
  data: Uint8Array | readonly Uint8Array[],
  level = 6,
  chunkBytes = GZIP_CHUNK_BYTES,
): Promise<Buffer[]> {
  const pieces = data instanceof Uint8Array ? [data] : data;
  const total = pieces.reduce((s, p) => s + p.length, 0);
  const parts: Promise<Buffer>[] = [];
  for (let off = 0; off < total || off === 0; off += chunkBytes) {
    const bytes = bytesBetween(pieces, off, Math.min(total, off + chunkBytes));
    parts.push(gzipAsync(bytes, { level, chunkSize: outputChunk(bytes.length) }));
    if (total === 0) break;
  }
  return Promise.all(parts);
}

/** Bytes [from, to) of the pieces taken as one buffer: a view when one piece holds them. */
function bytesBetween(pieces: readonly Uint8Array[], from: number, to: number): Uint8Array {
  let start = 0;
  let k = 0;
  while (k < pieces.length - 1 && start + pieces[k].length <= from) start += pieces[k++].length;
  if (k >= pieces.length) return new Uint8Array(0);
  if (to <= start + pieces[k].length) return pieces[k].subarray(from - start, to - start);
  const out = new Uint8Array(to - from);
  for (let at = 0; at < out.length; k++) {
    const piece = pieces[k].subarray(Math.max(0, from + at - start), Math.min(pieces[k].length, to - start));
    out.set(piece, at);
    at += piece.length;
    start += pieces[k].length;
  }
  return out;
}
