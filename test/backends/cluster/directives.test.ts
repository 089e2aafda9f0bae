/**
 * Directive lines against each scheduler's documented syntax. The expected lines are written from the
 * manuals, not from the code:
 * - Slurm: sbatch(1), Slurm 22.05.8 (Debian slurm-client 22.05.8-4), OPTIONS --cpus-per-task, --mem
 *   ("Default units are megabytes. Different units can be specified using the suffix [K|M|G|T]"),
 *   --time (acceptable formats include "hours:minutes:seconds" and "days-hours:minutes:seconds"),
 *   --array ("A maximum number of simultaneously running tasks from the job array may be specified
 *   using a "%" separator"), --gres, --no-requeue.
 * - PBS: qsub(1B) and pbs_resources(7B), OpenPBS (doc/man1/qsub.1B at 1dd4c360): "-l select=[N:]chunk",
 *   chunk "resource_name=value[:resource_name=value ...]", "-J <range> [%<max subjobs>]" with range X-Y[:Z].
 * - LSF: IBM Spectrum LSF 10.1 bsub -J "job_name[index_list]%job_slot_limit", -W [hour:]minute,
 *   -M mem_limit with units KB/MB/GB..., -n, -gpu.
 * - Grid Engine: sge_submit(1) and queue_conf(5), Son of Grid Engine 8.1.9: -l h_rt (time format
 *   [[hours:]minutes:]seconds), -l h_vmem, -pe, -t n[-m[:s]], -tc max_running_tasks.
 */
import { describe, expect, it } from 'vitest';
import type { Resources } from '../../../src/backends/backend.js';
import { DirectiveError, hhmmss, lsfDirectives, pbsDirectives, sgeDirectives, slurmDirectives, slurmTime } from '../../../src/backends/directives.js';

const R: Resources = { cpus: 4, gpus: 1, memory_mb: 4096, walltime_s: 5400, partition: 'compute', account: 'proj-42' };

describe('time formats', () => {
  it('writes HH:MM:SS and D-HH:MM:SS as the manuals spell them', () => {
    expect(hhmmss(5400)).toBe('01:30:00');
    expect(hhmmss(59)).toBe('00:00:59');
    expect(hhmmss(100 * 3600)).toBe('100:00:00'); // PBS/SGE accept hours above 24
    expect(slurmTime(5400)).toBe('01:30:00');
    expect(slurmTime(36 * 3600 + 61)).toBe('1-12:01:01'); // sbatch --time "days-hours:minutes:seconds"
  });
});

describe('Slurm (sbatch(1), 22.05)', () => {
  it('requests one task of N cpus, memory in MiB, time, gpus, partition, account, qos', () => {
    const d = slurmDirectives({ ...R, qos: 'normal' }, 'job1');
    expect(d).toEqual([
      '#SBATCH --job-name=job1',
      '#SBATCH --nodes=1',
      '#SBATCH --ntasks=1',
      '#SBATCH --cpus-per-task=4',
      '#SBATCH --mem=4096M',
      '#SBATCH --time=01:30:00',
      '#SBATCH --gres=gpu:1',
      '#SBATCH --partition=compute',
      '#SBATCH --account=proj-42',
      '#SBATCH --qos=normal',
      '#SBATCH --no-requeue',
      '#SBATCH --output=slurm-%j.out',
    ]);
  });
  it('writes an array with its throttle as --array=1-N%T', () => {
    const d = slurmDirectives(R, 'arr', { count: 200, throttle: 20 });
    expect(d).toContain('#SBATCH --array=1-200%20');
    expect(d).toContain('#SBATCH --output=slurm-%A_%a.out'); // %A array id, %a index (sbatch(1) filename pattern)
    expect(slurmDirectives(R, 'arr', { count: 3 })).toContain('#SBATCH --array=1-3');
  });
  it('leaves memory to the site when none is asked for', () => {
    expect(slurmDirectives({ ...R, memory_mb: undefined }, 'j').some((l) => l.includes('--mem'))).toBe(false);
  });
  it('copies extra directives, adding the prefix where it is missing', () => {
    const d = slurmDirectives({ ...R, extra: ['--constraint=v100', '#SBATCH --exclusive'] }, 'j');
    expect(d.slice(-2)).toEqual(['#SBATCH --constraint=v100', '#SBATCH --exclusive']);
  });
});

describe('PBS (qsub(1B), OpenPBS)', () => {
  it('puts cpus, memory and gpus in one select chunk, walltime as HH:MM:SS', () => {
    const d = pbsDirectives(R, 'job1');
    expect(d).toContain('#PBS -l select=1:ncpus=4:mem=4096mb:ngpus=1');
    expect(d).toContain('#PBS -l walltime=01:30:00');
    expect(d).toContain('#PBS -q compute');
    expect(d).toContain('#PBS -A proj-42');
    expect(d).toContain('#PBS -N job1');
    expect(d).toContain('#PBS -r n');
  });
  it('writes an array as -J 1-N%T', () => {
    const d = pbsDirectives(R, 'arr', { count: 50, throttle: 5 });
    expect(d).toContain('#PBS -J 1-50%5');
    expect(d).not.toContain('#PBS -r n'); // "Job arrays are always rerunnable" (qsub(1B))
  });
  it('refuses qos (PBS has none) with a hint', () => {
    expect(() => pbsDirectives({ ...R, qos: 'high' }, 'j')).toThrow(/resources\.qos: PBS has no quality-of-service option/);
  });
});

describe('LSF (bsub, IBM Spectrum LSF 10.1)', () => {
  it('uses -n, -W in minutes, -M and rusage with MB units, -gpu, -q, -P', () => {
    const d = lsfDirectives(R, 'job1');
    expect(d).toEqual([
      '#BSUB -J job1',
      '#BSUB -n 4',
      '#BSUB -R "span[hosts=1]"',
      '#BSUB -W 90', // 1 h 30 min: "-W [hour:]minute ... minutes can be specified as a number greater than 59"
      '#BSUB -M 4096MB',
      '#BSUB -R "rusage[mem=4096MB]"',
      '#BSUB -gpu "num=1"',
      '#BSUB -q compute',
      '#BSUB -P proj-42',
      '#BSUB -o lsf-%J.out',
      '#BSUB -e lsf-%J.out',
    ]);
  });
  it('rounds a walltime up to whole minutes', () => {
    expect(lsfDirectives({ ...R, walltime_s: 61 }, 'j')).toContain('#BSUB -W 2');
  });
  it('writes an array as -J "name[1-N]%T" with %I in the output name', () => {
    const d = lsfDirectives(R, 'arr', { count: 1000, throttle: 50 });
    expect(d[0]).toBe('#BSUB -J "arr[1-1000]%50"');
    expect(d).toContain('#BSUB -o lsf-%J_%I.out');
  });
});

describe('Grid Engine (sge_submit(1), SGE 8.1.9)', () => {
  const r = { ...R, gpus: 0 };
  it('uses h_rt, per-slot h_vmem, a parallel environment for several cpus, -cwd and bash', () => {
    const d = sgeDirectives(r, 'job1');
    expect(d).toContain('#$ -l h_rt=01:30:00');
    expect(d).toContain('#$ -l h_vmem=1024M'); // 4096 MiB over 4 slots: h_vmem is per slot
    expect(d).toContain('#$ -pe smp 4');
    expect(d).toContain('#$ -cwd');
    expect(d).toContain('#$ -S /bin/bash');
    expect(d).toContain('#$ -q compute');
  });
  it('keeps the campaign\'s own parallel environment', () => {
    const d = sgeDirectives({ ...r, extra: ['-pe mpi 4'] }, 'j');
    expect(d.filter((l) => l.includes('-pe'))).toEqual(['#$ -pe mpi 4']);
  });
  it('writes an array as -t 1-N and -tc T', () => {
    const d = sgeDirectives(r, 'arr', { count: 10, throttle: 3 });
    expect(d).toContain('#$ -t 1-10');
    expect(d).toContain('#$ -tc 3');
  });
  it('refuses gpus and qos, which Grid Engine has no standard request for', () => {
    expect(() => sgeDirectives(R, 'j')).toThrow(/resources\.gpus: Grid Engine has no standard GPU request/);
    expect(() => sgeDirectives({ ...r, qos: 'x' }, 'j')).toThrow(DirectiveError);
  });
});

describe('values on directive lines', () => {
  it.each([
    ['a partition with a space', { partition: 'gpu queue' }],
    ['a partition with a newline', { partition: 'gpu\n#SBATCH --x' }],
    ['an account with a quote', { account: "it's" }],
    ['a qos with $()', { qos: '$(reboot)' }],
  ])('refuses %s, naming the key', (_w, over) => {
    expect(() => slurmDirectives({ ...R, ...over } as Resources, 'j')).toThrow(/^resources\.(partition|account|qos): expected a name/);
  });
  it('refuses a multi-line extra directive', () => {
    expect(() => slurmDirectives({ ...R, extra: ['--a\n--b'] }, 'j')).toThrow(/scheduler_lines\[0\]: expected one line/);
  });
  it('refuses bad numbers', () => {
    expect(() => slurmDirectives({ ...R, cpus: 0 }, 'j')).toThrow(/resources\.cpus/);
    expect(() => slurmDirectives({ ...R, walltime_s: 0 }, 'j')).toThrow(/resources\.walltime/);
    expect(() => slurmDirectives(R, 'j', { count: 3, throttle: 0 })).toThrow(/array_throttle/);
  });
});
