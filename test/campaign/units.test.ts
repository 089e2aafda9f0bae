/**
 * Walltime and memory parsing.
 * Source of the formats: Slurm's sbatch manual page, option --time ("Acceptable time formats include
 * "minutes", "minutes:seconds", "hours:minutes:seconds", "days-hours", "days-hours:minutes" and
 * "days-hours:minutes:seconds"") and option --mem ("Default units are megabytes. Different units can be
 * specified using the suffix [K|M|G|T]"; Slurm counts these in powers of 1024). ratchet accepts the
 * unambiguous subset "hours:minutes:seconds" and "days-hours:minutes:seconds", plus whole seconds.
 * Expected values are worked out by hand beside each case.
 */
import { describe, expect, it } from 'vitest';
import { formatMemory, formatWalltime, parseMemory, parseWalltime } from '../../src/campaign/units.js';

describe('parseWalltime', () => {
  it.each([
    ['02:00:00', 2 * 3600],
    ['00:10:00', 10 * 60],
    ['48:00:00', 48 * 3600], // hours above 23 in the HH:MM:SS form
    ['1-00:00:00', 24 * 3600],
    ['2-12:30:15', 2 * 86400 + 12 * 3600 + 30 * 60 + 15],
    ['7-00:00:00', 7 * 86400],
    ['3600', 3600], // a bare number written as a string is seconds
    [90, 90],
  ] as const)('%s -> %d s', (text, seconds) => {
    expect(parseWalltime(text)).toBe(seconds);
  });

  it.each(['-1', '-01:00:00', '00:00:00', '0', 0, -5, 1.5, '1:30', '01:60:00', '01:00:60', '1-24:00:00', '2h', '', 'abc', '1-', '01:00:00:00'])(
    'rejects %j',
    (bad) => {
      expect(parseWalltime(bad as string | number)).toBeUndefined();
    },
  );

  it('formats back to HH:MM:SS and D-HH:MM:SS', () => {
    expect(formatWalltime(7200)).toBe('02:00:00');
    expect(formatWalltime(172800)).toBe('48:00:00');
    expect(formatWalltime(2 * 86400 + 12 * 3600 + 30 * 60 + 15, { days: true })).toBe('2-12:30:15');
    expect(formatWalltime(59, { days: true })).toBe('00:00:59');
    for (const s of [1, 59, 3600, 86399, 86400, 123457]) {
      expect(parseWalltime(formatWalltime(s))).toBe(s);
      expect(parseWalltime(formatWalltime(s, { days: true }))).toBe(s);
    }
  });
});

describe('parseMemory (MiB, binary units)', () => {
  it.each([
    ['500M', 500],
    ['4G', 4 * 1024],
    ['4GB', 4096],
    ['4GiB', 4096],
    ['4g', 4096],
    ['1.5G', 1536], // 1.5 x 1024
    ['1T', 1024 * 1024],
    ['2048K', 2], // 2048 / 1024
    ['512K', 1], // half a MiB rounds up to 1
    ['1000', 1000], // a bare number is MiB, as in Slurm's --mem
    [256, 256],
  ] as const)('%s -> %d MiB', (text, mib) => {
    expect(parseMemory(text)).toBe(mib);
  });

  it.each(['0G', '-1G', '4X', 'G', '', '4 GB extra', 0, -3, Number.NaN, Infinity])('rejects %j', (bad) => {
    expect(parseMemory(bad as string | number)).toBeUndefined();
  });

  it('formats back', () => {
    expect(formatMemory(4096)).toBe('4G');
    expect(formatMemory(1536)).toBe('1536M');
    expect(parseMemory(formatMemory(1536))).toBe(1536);
  });
});
