/**
 * The one-node Slurm the real-scheduler suites share (test/slurm/cluster.sh). Several test files may
 * ask for it at once: the start runs under a lock, and the cluster is stopped once, after every test
 * file has finished, by the global teardown (test/slurm/teardown.ts), and only if a test of the same
 * test run started it: the marker file holds the run's id (set by the global setup, inherited by the
 * test processes), so another vitest run on the same machine (one folder's tests, say) leaves it alone.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';

export const CLUSTER_SCRIPT = join(import.meta.dirname, 'cluster.sh');
const STATE = process.env.RATCHET_SLURM_STATE ?? '/tmp/ratchet-slurm';
const MARKER = join(STATE, 'started-by-tests');

/** This test run's id: from the vitest global setup (test/slurm/teardown.ts), else this process's own. */
function runId(): string {
  process.env.RATCHET_TEST_RUN ??= `pid-${process.pid}`;
  return process.env.RATCHET_TEST_RUN;
}

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
  const script = `if ! sinfo -h -o %T 2>/dev/null | grep -qE 'idle|mixed|allocated'; then bash "$1" start && printf '%s' "$3" > "$2"; fi`;
  const r = spawnSync('flock', [join(STATE, '.start.lock'), 'bash', '-c', script, 'start', CLUSTER_SCRIPT, MARKER, runId()], {
    encoding: 'utf8',
    timeout: 150_000,
  });
  if (r.status !== 0 || !sinfoUp()) throw new Error(`test/slurm/cluster.sh start failed:\n${r.stdout}\n${r.stderr}`);
}

/** Stop the cluster if a test of this run started it (all jobs are cancelled first, by cluster.sh stop). */
export function stopIfStartedByTests(): void {
  if (!existsSync(MARKER) || readFileSync(MARKER, 'utf8').trim() !== runId()) return;
  spawnSync('bash', [CLUSTER_SCRIPT, 'stop'], { timeout: 60_000 });
  rmSync(MARKER, { force: true });
}
