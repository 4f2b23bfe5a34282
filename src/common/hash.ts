/** SHA-256 of files and buffers, used to tie transforms and outputs to the exact inputs. */
import { createHash } from "node:crypto";
import { createReadStream } from "node:fs";

/** Hex SHA-256 of a buffer. */
export function sha256Buffer(data: Uint8Array): string {
  return createHash("sha256").update(data).digest("hex");
}

/** Hex SHA-256 of a file, streamed. */
export async function sha256File(path: string): Promise<string> {
  const hash = createHash("sha256");
  for await (const chunk of createReadStream(path)) hash.update(chunk as Buffer);
  return hash.digest("hex");
}
