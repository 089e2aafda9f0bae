import { describe, expect, it, beforeAll, afterAll } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { linearRegression, standardDeviation, mean } from 'simple-statistics';
import { readThermoTable, ThermoError, parseField, findColumn, normaliseName } from '../../src/gates/thermo.js';
import { checkDrift } from '../../src/gates/drift.js';
import { GateInputError } from '../../src/gates/types.js';

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-thermo-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const file = (name: string, text: string | Buffer) => {
  const p = join(dir, name);
  writeFileSync(p, text);
  return p;
};

describe('thermo table reader', () => {
  it('reads CSV with a header row', async () => {
    const t = await readThermoTable(file('a.csv', 'time,etot,temp\n0,-10.0,300\n1,-10.5,301.5\n'));
    expect(t.header).toEqual(['time', 'etot', 'temp']);
    expect(t.headerLine).toBe(1);
    expect(Array.from(t.values[1])).toEqual([-10, -10.5]);
    expect(Array.from(t.lines)).toEqual([2, 3]);
  });

  it("reads whitespace columns under a '#' header with comments above it, blank lines, CRLF and .gz", async () => {
    const text = '# made by some MD code\r\n#   Step  Time  TotEng\r\n\r\n  0  0.0  -5.0\r\n# a comment\r\n 10\t0.01\t-4.99e0\r\n';
    for (const p of [file('b.dat', text), file('b.dat.gz', gzipSync(text))]) {
      const t = await readThermoTable(p);
      expect(t.header).toEqual(['Step', 'Time', 'TotEng']);
      expect(t.headerLine).toBe(2);
      expect(Array.from(t.values[2])).toEqual([-5, -4.99]);
      expect(Array.from(t.lines)).toEqual([4, 6]);
    }
  });

  it('reads nan and inf as non-finite numbers', () => {
    expect(parseField('nan')).toBeNaN();
    expect(parseField('-NaN')).toBeNaN();
    expect(parseField('inf')).toBe(Infinity);
    expect(parseField('-Infinity')).toBe(-Infinity);
    expect(parseField('1e3')).toBe(1000);
    expect(parseField('abc')).toBeUndefined();
  });

  it('finds columns by name, ignoring case and a unit suffix', () => {
    expect(normaliseName('Time[fs]')).toBe('time');
    expect(normaliseName('E_tot (eV)')).toBe('e_tot');
    expect(findColumn(['Step', 'Time[fs]', 'TotEng'], undefined, ['time'])).toBe(1);
    expect(findColumn(['Step', 'Time[fs]', 'TotEng'], 'toteng')).toBe(2);
    expect(findColumn(['a'], 'b')).toBe(-1);
  });

  // Broken tables: each with the exact message (file:line: what was expected, what was found).
  it.each([
    ['empty.csv', '', 'empty.csv: expected a header row and rows of numbers, found an empty file'],
    ['noheader.csv', '0,1\n1,2\n', 'noheader.csv:1: expected a header row naming the columns before the first row of numbers'],
    ['norows.csv', 'time,etot\n', 'norows.csv: expected rows of numbers under the header, found none'],
    ['short.csv', 'time,etot\n0,1\n1\n', 'short.csv:3: expected 2 fields (as named in the header on line 1), found 1'],
    ['word.dat', 'time etot\n0 1\n1 x1\n', "word.dat:3: expected a number in column 'etot', found 'x1'"],
    ['emptyname.csv', 'time,,etot\n0,1,2\n', 'emptyname.csv:1: expected a header row of column names, found an empty name'],
  ])('%s', async (name, text, message) => {
    const p = file(name, text);
    const err = await readThermoTable(p).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ThermoError);
    expect((err as Error).message).toBe(join(dir, message));
  });

  it('a missing file names the file', async () => {
    await expect(readThermoTable(join(dir, 'nope.csv'))).rejects.toThrow(`${join(dir, 'nope.csv')}: cannot read the file (ENOENT)`);
  });
});

describe('drift from a thermo table', () => {
  // 64 atoms; total energy rises 0.3 meV/atom/ps with a deterministic wiggle; time column in ps.
  const rows = Array.from({ length: 201 }, (_, k) => {
    const tPs = 0.01 * k;
    const perAtom = -2.5 + 0.3e-3 * tPs + 2e-5 * Math.sin(k);
    return { tPs, e: 64 * perAtom, T: 300 + 10 * Math.cos(k) };
  });
  const csv = 'step,time,pe,etotal,temp\n' + rows.map((r, k) => `${k * 10},${r.tPs},0,${r.e},${r.T}`).join('\n') + '\n';

  it('slope, std, excursion and mean temperature agree with simple-statistics', async () => {
    const res = await checkDrift([file('run.csv', csv)], { atoms: 64, timeUnit: 'ps' });
    const f = res.figures;
    const e = rows.map((r) => (r.e / 64) * 1000);
    expect(f.frames).toBe(201);
    expect(f.atoms).toBe(64);
    expect(f.energy_source).toBe("column 'etotal'");
    expect(f.time_source).toBe("column 'time' (ps)");
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(linearRegression(rows.map((r, k) => [r.tPs, e[k]])).m, 9);
    expect(f.std_meV_per_atom!).toBeCloseTo(standardDeviation(e), 9);
    expect(f.max_excursion_meV_per_atom!).toBeCloseTo(Math.max(...e.map((x) => Math.abs(x - e[0]))), 9);
    expect(f.mean_temperature_K!).toBeCloseTo(mean(rows.map((r) => r.T)), 9);
    expect(res.verdict).toBe('warn'); // |0.3| > 0.1 meV/atom/ps
  });

  it('step column x time step when there is no time column; explicit column names', async () => {
    const ws = 'Step PotEng MyEtot\n' + rows.map((r, k) => `${k * 10} 0 ${r.e}`).join('\n') + '\n';
    // steps of 1 fs: step 10 k is at 10 k fs = 0.01 k ps, the same times as above
    const res = await checkDrift([file('run.txt', ws)], { atoms: 64, timestep: 1, energyColumn: 'MyEtot' });
    expect(res.figures.time_source).toBe("column 'Step' x 1 fs");
    const e = rows.map((r) => (r.e / 64) * 1000);
    expect(res.figures.slope_meV_per_atom_per_ps!).toBeCloseTo(linearRegression(rows.map((r, k) => [r.tPs, e[k]])).m, 9);
    expect(res.figures.mean_temperature_K).toBeNull();
  });

  it('a blown-up row fails, naming the frame and the line', async () => {
    const bad = 'time etot\n0 -1\n1 -1\n2 nan\n3 -1\n';
    const p = file('blow.dat', bad);
    const res = await checkDrift([p], { atoms: 1 });
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(2);
    expect(res.reasons[0]).toBe(`the run blew up: frame 2 of ${p} has a non-finite total energy (${p} line 4); figures cover the 2 frame(s) before it`);
  });

  it('refuses a table without atom count, energy column or time', async () => {
    const p = file('t.csv', 'time,etot\n0,1\n1,2\n');
    await expect(checkDrift([p], {})).rejects.toThrow(
      new GateInputError(`${p}: a thermo table does not say how many atoms it describes; give the atom count (1 if the energy column is already per atom)`),
    );
    const q = file('u.csv', 'time,pe\n0,1\n1,2\n');
    await expect(checkDrift([q], { atoms: 2 })).rejects.toThrow(
      `${q}:1: expected a total energy column (one of total_energy, etot, toteng, etotal, e_tot, e_total, totalenergy, total), found columns time, pe`,
    );
    await expect(checkDrift([p], { atoms: 2, energyColumn: 'E' })).rejects.toThrow(`${p}:1: expected a total energy column named 'E', found columns time, etot`);
    const r = file('v.csv', 'etot\n0\n1\n');
    await expect(checkDrift([r], { atoms: 2 })).rejects.toThrow(`${r}:1: no time column (one of time, time_fs, t, simulation_time); give the time step in fs (time = row index x time step)`);
  });
});
