/**
 * The one-node Slurm the real-scheduler suites share (test/slurm/cluster.sh). Several test files may
 * ask for it at once: the start runs under a lock, and the cluster is stopped once, after every test
 * file has finished, by the global teardown (test/slurm/teardown.ts), and only if a test started it.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';

export const CLUSTER_SCRIPT = join(import.meta.dirname, 'cluster.sh');
const STATE = process.env.RATCHET_SLURM_STATE ?? '/tmp/ratchet-slurm';
const MARKER = join(STATE, 'started-by-tests');

export const slurmInstalled =
  spawnSync('sh', ['-c', 'command -v slurmctld && command -v sbatch'], { encoding: 'utf8' }).status === 0;

export function sinfoUp(): boolean {
  const r = spawnSync('sinfo', ['-h', '-o', '%T'], { encoding: 'utf8', timeout: 20_000 });
  return r.status === 0 && /idle|mixed|allocated/.test(r.stdout ?? '');
}

/** Start the cluster unless it answers already (under a lock: two test files may ask at once). */
export function ensureSlurm(): void {
  if (sinfoUp()) return;
  mkdirSync(STATE, { recursive: true });
  const script = `if ! sinfo -h -o %T 2>/dev/null | grep -qE 'idle|mixed|allocated'; then bash "$1" start && touch "$2"; fi`;
  const r = spawnSync('flock', [join(STATE, '.start.lock'), 'bash', '-c', script, 'start', CLUSTER_SCRIPT, MARKER], {
    encoding: 'utf8',
    timeout: 150_000,
  });
  if (r.status !== 0 || !sinfoUp()) throw new Error(`test/slurm/cluster.sh start failed:\n${r.stdout}\n${r.stderr}`);
}

/** Stop the cluster if a test started it (all jobs are cancelled first, by cluster.sh stop). */
export function stopIfStartedByTests(): void {
  if (!existsSync(MARKER)) return;
  spawnSync('bash', [CLUSTER_SCRIPT, 'stop'], { timeout: 60_000 });
  rmSync(MARKER, { force: true });
}
