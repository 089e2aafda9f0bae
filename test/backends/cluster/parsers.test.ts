/**
 * Status-command parsers on the documented output formats; samples and their sources are listed in
 * samples/README.md (real Slurm 22.05.8 output where the test cluster could produce it).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { mapLsfState, parseBjobs, parseLsfTime, LsfDialect } from '../../../src/backends/lsf.js';
import { mapPbsState, parsePbsJson, PbsDialect } from '../../../src/backends/pbs.js';
import { expandTaskRange, mapSgeState, parseQacct, parseQstat, parseQstatFullNames, qacctToJob, SgeDialect } from '../../../src/backends/sge.js';
import { jobcompToJob, mapSlurmState, parseJobcompLine, parseSacct, parseSlurmExit, parseSqueue, SlurmDialect } from '../../../src/backends/slurm.js';

const sample = (f: string) => readFileSync(join(import.meta.dirname, 'samples', f), 'utf8');
const states = (jobs: { id: string; state: string }[]) => Object.fromEntries(jobs.map((j) => [j.id, j.state]));

describe('Slurm', () => {
  it('reads squeue -O output: element ids ARRAYID_INDEX, states, reasons, raw exit status, end time', () => {
    const jobs = parseSqueue(sample('slurm-squeue.txt'));
    expect(jobs.map((j) => j.id)).toEqual(['18', '14', '16_3', '16_2', '16_1', '15', '13', '16_2', '16_1']);
    const fail = jobs.find((j) => j.id === '15')!;
    expect(fail).toMatchObject({ state: 'FAILED', reason: 'NonZeroExitCode', exitCode: 3, name: 'sample-fail' });
    expect(fail.end).toBe(new Date(2026, 11, 1, 23, 9, 42).getTime()); // local time, as Slurm prints it
    expect(jobs.find((j) => j.id === '13')).toMatchObject({ state: 'TIMEOUT', signal: 15, exitCode: 0 });
    expect(jobs[7]).toMatchObject({ id: '16_2', state: 'PENDING', reason: 'JobArrayTaskLimit' });
    expect(jobs[7].end).toBeUndefined(); // "N/A"
  });
  it('decodes exit codes in both forms Slurm prints', () => {
    expect(parseSlurmExit('3:0')).toEqual({ code: 3, signal: undefined });
    expect(parseSlurmExit('0:15')).toEqual({ code: 0, signal: 15 });
    expect(parseSlurmExit('768')).toEqual({ code: 3, signal: undefined }); // 3 << 8
    expect(parseSlurmExit('9')).toEqual({ code: 0, signal: 9 });
  });
  it('maps every state of squeue(1) JOB STATE CODES that ratchet distinguishes', () => {
    const m = (state: string, reason?: string) => mapSlurmState({ id: '1', state, reason });
    expect(m('PENDING')).toMatchObject({ state: 'queued', final: false });
    expect(m('PENDING', 'PartitionConfig').reason).toMatch(/will not start by itself/);
    expect(m('CONFIGURING')).toMatchObject({ state: 'queued', final: false });
    expect(m('RUNNING')).toMatchObject({ state: 'running', final: false });
    expect(m('COMPLETING')).toMatchObject({ state: 'running', final: false });
    expect(m('SUSPENDED')).toMatchObject({ state: 'running', final: false });
    expect(m('COMPLETED')).toMatchObject({ state: 'succeeded', final: true });
    expect(m('FAILED')).toMatchObject({ state: 'failed', final: true });
    expect(m('TIMEOUT')).toMatchObject({ state: 'walltime', final: true });
    expect(m('OUT_OF_MEMORY')).toMatchObject({ state: 'out_of_memory', final: true });
    expect(m('NODE_FAIL')).toMatchObject({ state: 'node_failure', final: true });
    expect(m('BOOT_FAIL')).toMatchObject({ state: 'node_failure', final: true });
    expect(m('PREEMPTED')).toMatchObject({ state: 'preempted', final: true });
    expect(m('CANCELLED')).toMatchObject({ state: 'cancelled', final: true });
    expect(m('DEADLINE')).toMatchObject({ state: 'cancelled', final: true });
    expect(m('SOMETHING_NEW')).toMatchObject({ state: 'running', final: false });
  });
  it('maps the composed samples of states the test cluster cannot produce', () => {
    const jobs = parseSqueue(sample('slurm-squeue-composed.txt'));
    expect(jobs.map((j) => [j.id, mapSlurmState(j).state])).toEqual([
      ['31', 'out_of_memory'],
      ['32', 'node_failure'],
      ['30_2', 'preempted'],
      ['34', 'node_failure'],
      ['35', 'queued'],
      ['36', 'running'],
    ]);
  });
  it('reads jobcomp/filetxt lines, whose values are not escaped', () => {
    const lines = sample('slurm-jobcomp.txt').trim().split('\n');
    const jobs = lines.map((l) => jobcompToJob(parseJobcompLine(l))!);
    expect(states(jobs)).toMatchObject({ '13': 'TIMEOUT', '14': 'COMPLETED', '15': 'FAILED', '18': 'CANCELLED', '16_1': 'COMPLETED', '16_2': 'COMPLETED', '16_3': 'COMPLETED' });
    const spaced = parseJobcompLine(lines[lines.length - 1]);
    expect(spaced.WorkDir).toBe('/tmp/sample/dir with space');
    expect(spaced.ReservationName).toBe('');
    expect(jobcompToJob(spaced)).toMatchObject({ state: 'FAILED', exitCode: 2 });
    // jobcomp writes ExitCode=0:0 for a walltime kill: the state carries the class.
    expect(mapSlurmState(jobs.find((j) => j.id === '13')!).state).toBe('walltime');
  });
  it('reads sacct -P output, "CANCELLED by <uid>" included', () => {
    const jobs = parseSacct(sample('sacct.txt'));
    expect(states(jobs)).toEqual({ '41_1': 'COMPLETED', '41_2': 'FAILED', '41_3': 'TIMEOUT', '42': 'OUT_OF_MEMORY', '43': 'CANCELLED', '44': 'NODE_FAIL', '45': 'PREEMPTED' });
    expect(jobs.find((j) => j.id === '41_2')?.exitCode).toBe(3);
  });
  it('reads job ids from sbatch --parsable and addresses array elements', () => {
    const d = new SlurmDialect();
    expect(d.parseSubmitId('41\n')).toBe('41');
    expect(d.parseSubmitId('41;cluster2\n')).toBe('41');
    expect(d.parseSubmitId('sbatch: error: Batch job submission failed\n')).toBeUndefined();
    expect(d.elementId('41', 3)).toBe('41_3');
    expect(d.queryIdOf('41_3')).toBe('41');
    expect(d.queryIdOf('42')).toBe('42');
  });
  it('treats "Invalid job id specified" (a purged id) as no jobs, other errors as no answer', () => {
    const d = new SlurmDialect();
    expect(d.parseQuery({ exitCode: 1, stdout: '', stderr: 'slurm_load_jobs error: Invalid job id specified\n', timedOut: false })).toEqual([]);
    expect(d.parseQuery({ exitCode: 1, stdout: '', stderr: 'slurm_load_jobs error: Socket timed out on send/recv operation\n', timedOut: false })).toBeUndefined();
  });
});

describe('PBS', () => {
  const jobs = parsePbsJson(sample('pbs-qstat.json'))!;
  it('reads qstat -f -F json: ids, states, Exit_status, comment, times', () => {
    expect(jobs).toHaveLength(13);
    expect(jobs.find((j) => j.id === '101.pbs01')).toMatchObject({ state: 'F', exitCode: 3, name: 't-fail' });
    expect(jobs.find((j) => j.id === '100.pbs01')?.end).toBe(new Date(2026, 11, 1, 23, 0, 0).getTime());
    expect(jobs.find((j) => j.id === '107.pbs01')?.reason).toMatch(/Insufficient amount of resource/);
  });
  it('maps states and the special exit values of job.h', () => {
    const m = Object.fromEntries(jobs.map((j) => [j.id, mapPbsState(j).state]));
    expect(m).toEqual({
      '100.pbs01': 'succeeded',
      '101.pbs01': 'failed',
      '102.pbs01': 'walltime', // JOB_EXEC_KILL_WALLTIME -29
      '103.pbs01': 'out_of_memory', // JOB_EXEC_KILL_MEM -27
      '104.pbs01': 'node_failure', // JOB_EXEC_RERUN_MS_FAIL -20
      '105.pbs01': 'preempted', // JOB_EXEC_RERUN -11
      '106.pbs01': 'cancelled', // 256 + SIGTERM
      '107.pbs01': 'queued',
      '108[].pbs01': 'running',
      '108[1].pbs01': 'running',
      '108[2].pbs01': 'succeeded',
      '108[3].pbs01': 'queued',
      '109.pbs01': 'cancelled', // finished without ever running
    });
    expect(mapPbsState({ id: 'x', state: 'F', exitCode: 271, reason: 'job killed: walltime 65 exceeded limit 60' }).state).toBe('walltime');
  });
  it('reads qsub job ids and addresses subjobs', () => {
    const d = new PbsDialect();
    expect(d.parseSubmitId('1234.pbs01\n')).toBe('1234.pbs01');
    expect(d.parseSubmitId('1234[].pbs01\n')).toBe('1234[].pbs01');
    expect(d.elementId('1234[].pbs01', 7)).toBe('1234[7].pbs01');
    expect(d.queryIdOf('1234[7].pbs01')).toBe('1234[].pbs01');
    expect(d.parseQuery({ exitCode: 35, stdout: '', stderr: 'qstat: Unknown Job Id 99.pbs01\n', timedOut: false })).toEqual([]);
    expect(d.parseQuery({ exitCode: 1, stdout: '', stderr: 'Connection refused\nqstat: cannot connect to server pbs01 (errno=111)\n', timedOut: false })).toBeUndefined();
  });
});

describe('LSF', () => {
  const now = new Date(2026, 11, 2, 0, 0, 0).getTime();
  const jobs = parseBjobs(sample('lsf-bjobs.txt'), now);
  it('reads bjobs -o with a delimiter: element ids JOBID[INDEX], exit codes, reasons, finish times', () => {
    expect(jobs.map((j) => j.id)).toEqual(['2001', '2002', '2003', '2004', '2005', '2006', '2007', '2008', '2010[1]', '2010[2]', '2010[3]']);
    expect(jobs[1]).toMatchObject({ state: 'EXIT', exitCode: 2 + 1 });
    expect(jobs[0].exitCode).toBeUndefined(); // "-"
    expect(jobs[0].end).toBe(new Date(2026, 11, 1, 23, 0).getTime());
  });
  it('maps states and termination reasons', () => {
    expect(Object.fromEntries(jobs.map((j) => [j.id, mapLsfState(j).state]))).toEqual({
      '2001': 'succeeded',
      '2002': 'failed',
      '2003': 'walltime', // TERM_RUNLIMIT
      '2004': 'out_of_memory', // TERM_MEMLIMIT
      '2005': 'node_failure', // ZOMBI
      '2006': 'preempted', // TERM_PREEMPT
      '2007': 'cancelled', // TERM_OWNER
      '2008': 'queued',
      '2010[1]': 'running',
      '2010[2]': 'succeeded',
      '2010[3]': 'queued',
    });
  });
  it('dates without a year fall in the past year when they would be in the future', () => {
    expect(parseLsfTime('Dec 31 23:00', new Date(2027, 0, 1, 1).getTime())).toBe(new Date(2026, 11, 31, 23, 0).getTime());
    expect(parseLsfTime('Jan  1 00:30', new Date(2027, 0, 1, 1).getTime())).toBe(new Date(2027, 0, 1, 0, 30).getTime());
  });
  it('reads bsub output and addresses elements', () => {
    const d = new LsfDialect();
    expect(d.parseSubmitId('Job <2010> is submitted to queue <normal>.\n')).toBe('2010');
    expect(d.elementId('2010', 3)).toBe('2010[3]');
    expect(d.queryIdOf('2010[3]')).toBe('2010');
    expect(d.submit('/x/run.sh', '/x')).toMatchObject({ cmd: 'bsub', args: [], stdinFile: '/x/run.sh' });
    expect(d.parseQuery({ exitCode: 255, stdout: '', stderr: 'Job <77> is not found\n', timedOut: false })).toEqual([]);
  });
});

describe('Grid Engine', () => {
  it('reads qstat reduced format, expanding pending task ranges into elements', () => {
    const jobs = parseQstat(sample('sge-qstat.txt'));
    expect(states(jobs)).toEqual({ '301': 'r', '302.1': 'r', '302.2': 'qw', '302.3': 'qw', '302.4': 'qw', '303': 'hqw', '304': 'Eqw', '305': 'dr' });
    expect(Object.fromEntries(jobs.map((j) => [j.id, mapSgeState(j).state]))).toEqual({
      '301': 'running',
      '302.1': 'running',
      '302.2': 'queued',
      '302.3': 'queued',
      '302.4': 'queued',
      '303': 'queued',
      '304': 'queued',
      '305': 'running',
    });
    expect(mapSgeState(jobs.find((j) => j.id === '304')!).reason).toMatch(/error state/);
  });
  it('reads real SGE 8.1.9 qstat and qacct output', () => {
    expect(states(parseQstat(sample('sge-qstat-real.txt')))).toEqual({ '15': 'qw', '16.1': 'r', '16.3': 'qw', '16.4': 'qw' });
    const recs = parseQacct(sample('sge-qacct-array.txt')).map((r) => qacctToJob(r)!);
    expect(recs.map((j) => [j.id, mapSgeState(j).state])).toEqual([
      ['16.1', 'succeeded'],
      ['16.2', 'succeeded'],
    ]);
  });
  it('expands task ranges', () => {
    expect(expandTaskRange('2-10:2')).toEqual([2, 4, 6, 8, 10]);
    expect(expandTaskRange('1-3:1,7')).toEqual([1, 2, 3, 7]);
    expect(expandTaskRange('5')).toEqual([5]);
  });
  it('reads qacct -j records and maps the failed codes of sge_status(5)', () => {
    const [rec] = parseQacct(sample('sge-qacct.txt'));
    expect(rec.failed).toBe('37  : qmaster enforced h_rt, h_cpu, or h_vmem limit');
    const job = qacctToJob(rec)!;
    expect(job).toMatchObject({ id: '15', state: 'ACCT', exitCode: 137, name: 'ge-wall' });
    expect(mapSgeState(job).state).toBe('walltime'); // ran 5 s of h_rt=5
    const acct = (failed: string, exit: number, wall = '10s', cat = '-l h_rt=3600') =>
      mapSgeState(qacctToJob({ jobnumber: '9', taskid: '2', failed, exit_status: String(exit), ru_wallclock: wall, category: cat })!).state;
    expect(acct('0', 0)).toBe('succeeded');
    expect(acct('0', 3)).toBe('failed');
    expect(acct('37  : qmaster enforced h_rt, h_cpu, or h_vmem limit', 137)).toBe('out_of_memory'); // 10 s of 3600: h_vmem
    expect(acct('17  : through signal', 137)).toBe('cancelled');
    expect(acct('25  : rescheduling', 0)).toBe('preempted');
    expect(acct('19  : before writing exit_status', 0)).toBe('node_failure');
    expect(acct('100 : assumedly after job', 137)).toBe('failed');
    expect(qacctToJob({ jobnumber: '9', taskid: '2', failed: '0', exit_status: '0' })!.id).toBe('9.2');
  });
  it('reads full job names from qstat -r', () => {
    const text = `${sample('sge-qstat.txt').trim()}\n       Full jobname:     demo.r0.label.a0123456789\n`;
    expect(parseQstatFullNames(text).get('demo.r0.label.a0123456789')).toBe('305');
  });
  it('reads qsub -terse ids, addresses tasks, cancels by range per job', () => {
    const d = new SgeDialect();
    expect(d.parseSubmitId('311\n')).toBe('311');
    expect(d.parseSubmitId('312.1-10:1\n')).toBe('312');
    expect(d.elementId('312', 4)).toBe('312.4');
    expect(d.cancel(['312.4', '312.2', '313'])).toEqual([
      { cmd: 'qdel', args: ['312', '-t', '2-4'] },
      { cmd: 'qdel', args: ['313'] },
    ]);
  });
});
