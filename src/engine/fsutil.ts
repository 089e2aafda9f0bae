/**
 * File steps that survive a SIGKILL at any point: write to a temporary name in the same directory,
 * sync, rename over the target. A reader sees the old file or the new one, never half of one.
 */
import { promises as fsp, constants as fsc } from 'node:fs';
import { basename, dirname, join } from 'node:path';

let counter = 0;

function tmpName(path: string): string {
  return join(dirname(path), `.${basename(path)}.tmp-${process.pid}-${counter++}`);
}

/** Write a file atomically (temporary file + fsync + rename). */
export async function writeFileAtomic(path: string, data: string | Uint8Array, mode = 0o644): Promise<void> {
  const tmp = tmpName(path);
  const fh = await fsp.open(tmp, 'w', mode);
  try {
    await fh.writeFile(data);
    await fh.sync();
  } finally {
    await fh.close();
  }
  try {
    await fsp.rename(tmp, path);
  } catch (err) {
    await fsp.unlink(tmp).catch(() => undefined);
    throw err;
  }
}

/** Skip the write when the file already holds exactly these bytes (keeps mtimes and avoids work on resume). */
export async function writeFileIfChanged(path: string, data: string, mode = 0o644): Promise<boolean> {
  try {
    const old = await fsp.readFile(path, 'utf8');
    if (old === data) return false;
  } catch {
    /* absent */
  }
  await writeFileAtomic(path, data, mode);
  return true;
}

/**
 * Concatenate files into `target` atomically. Each part that does not end with a newline gets one,
 * so concatenated extended XYZ files stay valid.
 */
export async function concatFilesAtomic(target: string, parts: string[]): Promise<void> {
  const tmp = tmpName(target);
  const out = await fsp.open(tmp, 'w', 0o644);
  try {
    for (const p of parts) {
      const buf = await fsp.readFile(p);
      if (buf.length === 0) continue;
      await out.write(buf);
      if (buf[buf.length - 1] !== 0x0a) await out.write('\n');
    }
    await out.sync();
  } finally {
    await out.close();
  }
  await fsp.rename(tmp, target);
}

/** Copy a file atomically (copy to a temporary name, then rename). */
export async function copyFileAtomic(from: string, to: string): Promise<void> {
  const tmp = tmpName(to);
  await fsp.copyFile(from, tmp);
  const fh = await fsp.open(tmp, 'r');
  try {
    await fh.sync();
  } finally {
    await fh.close();
  }
  await fsp.rename(tmp, to);
}

export async function exists(path: string): Promise<boolean> {
  try {
    await fsp.access(path, fsc.F_OK);
    return true;
  } catch {
    return false;
  }
}

/** Parse a JSON file; undefined when it is absent, or unreadable (e.g. a write cut short). */
export async function readJsonMaybe<T>(path: string): Promise<T | undefined> {
  let text: string;
  try {
    text = await fsp.readFile(path, 'utf8');
  } catch {
    return undefined;
  }
  try {
    return JSON.parse(text) as T;
  } catch {
    return undefined;
  }
}

/** Remove temporary files left behind by writes that a crash cut short. */
export async function removeStaleTemps(dir: string): Promise<void> {
  let names: string[];
  try {
    names = await fsp.readdir(dir);
  } catch {
    return;
  }
  await Promise.all(
    names.filter((n) => n.startsWith('.') && n.includes('.tmp-')).map((n) => fsp.unlink(join(dir, n)).catch(() => undefined)),
  );
}
