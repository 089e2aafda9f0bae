import { spawn } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, realpathSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { TaskSpec } from '../../src/backends/backend.js';

const made: string[] = [];

/** A fresh, real (symlink-free) temporary folder, removed by removeTempDirs(). */
export function tempDir(prefix = 'ratchet-backends-'): string {
  const dir = realpathSync(mkdtempSync(join(tmpdir(), prefix)));
  made.push(dir);
  return dir;
}

/** Remove the folders tempDir() made (call from afterAll). */
export function removeTempDirs(): void {
  for (const dir of made.splice(0)) rmSync(dir, { recursive: true, force: true });
}

/** A task spec with a created task directory under root. */
export function makeTask(root: string, name: string, over: Partial<TaskSpec> = {}): TaskSpec {
  const dir = over.dir ?? join(root, 'rounds', 'r0', 'label', name);
  mkdirSync(dir, { recursive: true });
  return {
    id: `r0/label/${name}`,
    round: 0,
    stage: 'label',
    dir,
    command: 'true',
    setup: [],
    env: {},
    resources: { cpus: 1, gpus: 0, walltime_s: 600 },
    name: `test-r0-label-${name}`,
    ...over,
  };
}

/** Run `bash run.sh` in dir; resolves with the script's exit code (or signal). */
export function runScript(dir: string, onStart?: (pid: number) => void): Promise<{ code: number | null; signal: NodeJS.Signals | null }> {
  return new Promise((resolve, reject) => {
    const child = spawn('bash', ['run.sh'], { cwd: dir, stdio: 'ignore' });
    child.on('error', reject);
    child.on('exit', (code, signal) => resolve({ code, signal }));
    if (onStart && child.pid !== undefined) onStart(child.pid);
  });
}

/** Wait until predicate() is true, checking every 20 ms; throws after limitMs (a guard, not a timing assertion). */
export async function waitFor(predicate: () => boolean, what: string, limitMs = 20_000): Promise<void> {
  const until = Date.now() + limitMs;
  while (!predicate()) {
    if (Date.now() > until) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

/** True when a process with this pid exists and is not a zombie (Linux /proc/<pid>/stat, state field). */
export function alive(pid: number): boolean {
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    return stat.slice(stat.lastIndexOf(')') + 2)[0] !== 'Z';
  } catch {
    return false;
  }
}
