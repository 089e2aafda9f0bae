/**
 * The directory `ratchet init` writes into: checked and created before anything is written, one
 * component at a time, so that every refusal names the path and none can loop.
 *
 * Why not `mkdir(dir, { recursive: true })`: on Linux a recursive mkdir of a path under /proc retries
 * forever (the kernel answers ENOENT for a parent that exists), so `ratchet init /proc/x` never returned.
 * A plain mkdir per missing component gives one answer per call.
 */
import { access, constants, mkdir, stat } from 'node:fs/promises';
import { dirname, resolve, sep } from 'node:path';

/** A refusal of the target: `message` reads `<path>: <what>; <what to do>`. */
export class TargetDirError extends Error {
  override name = 'TargetDirError';
}

/** Kernel file systems: files there are not files, and nothing may be written there. */
const KERNEL_FS = ['/proc', '/sys'];

const WHAT: Record<string, string> = {
  EACCES: 'permission denied',
  EPERM: 'operation not permitted',
  EROFS: 'is on a read-only file system',
  ENOSPC: 'no space left on the device',
  ENAMETOOLONG: 'the path is too long',
  ELOOP: 'too many symbolic links',
  ENOTDIR: 'a part of the path is not a directory',
  ENOENT: 'cannot be created here (its parent cannot hold new directories)',
  EEXIST: 'already exists and is not a directory',
};

/**
 * Make sure `dir` is a directory this process can write into, creating it (and missing parents) when
 * absent. Returns its absolute path. Throws TargetDirError, having created nothing it could avoid, when
 * the target is a file, lies under /proc or /sys, or cannot be created or written.
 */
export async function ensureTargetDir(dir: string): Promise<string> {
  const { target, missing } = await checkTargetDir(dir);
  for (const d of missing) {
    try {
      await mkdir(d);
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code === 'EEXIST' && (await stat(d).catch(() => undefined))?.isDirectory()) continue;
      throw refusal(d, err as NodeJS.ErrnoException);
    }
  }
  return target;
}

/**
 * The checks of ensureTargetDir without creating anything: returns the absolute target and the
 * directories that would be created (outermost first), or throws TargetDirError.
 */
export async function checkTargetDir(dir: string): Promise<{ target: string; missing: string[] }> {
  const target = resolve(dir);
  const kernel = KERNEL_FS.find((k) => target === k || target.startsWith(k + sep));
  if (kernel) throw new TargetDirError(`${target}: is under ${kernel}, a kernel file system that cannot hold a campaign; choose a directory on a disk`);

  // Walk up to the nearest existing ancestor, remembering the components to create.
  const missing: string[] = [];
  let at = target;
  for (;;) {
    const st = await stat(at).catch((err: NodeJS.ErrnoException) => {
      if (err.code === 'ENOENT' || err.code === 'ENOTDIR') return undefined; // found further up
      throw refusal(at, err);
    });
    if (st) {
      if (!st.isDirectory()) {
        throw new TargetDirError(
          at === target
            ? `${at}: already exists and is not a directory; give a directory (init writes campaign.yaml and start.xyz into it)`
            : `${at}: is not a directory, so ${target} cannot be created; check the path`,
        );
      }
      break;
    }
    missing.unshift(at);
    const up = dirname(at);
    if (up === at) break; // the root itself is missing: mkdir below reports it
    at = up;
  }
  try {
    await access(at, constants.W_OK | constants.X_OK);
  } catch (err) {
    throw new TargetDirError(`${at}: cannot write here (${WHAT[(err as NodeJS.ErrnoException).code ?? ''] ?? 'not writable'}); choose a writable directory`);
  }
  return { target, missing };
}

function refusal(path: string, err: NodeJS.ErrnoException): TargetDirError {
  const what = WHAT[err.code ?? ''] ?? `cannot be created (${err.code ?? err.message})`;
  return new TargetDirError(`${path}: ${what}; choose a writable directory`);
}
