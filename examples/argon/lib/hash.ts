import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';

/** sha256 (hex) of a file's bytes. */
export async function sha256File(path: string): Promise<string> {
  const h = createHash('sha256');
  for await (const chunk of createReadStream(path)) h.update(chunk as Buffer);
  return h.digest('hex');
}
