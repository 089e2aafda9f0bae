/**
 * errors gate: stress figures against an independent computation. Debian's ASE (/usr/bin/python3) builds strained,
 * rattled fcc Cu cells, labels them with its EMT calculator (K. W. Jacobsen, P. Stoltze, J. K. Nørskov, Surf. Sci. 366,
 * 394 (1996); ASE's own implementation) and writes extended XYZ with ASE's writer; the "prediction" carries the EMT
 * stress, energy and forces of the same atoms in a cell 0.3 % larger (the positions written are the reference's).
 * numpy computes the stress RMSE/MAE over the 6 Voigt components and the pressure error from ASE's get_stress(); the
 * gate must agree. Skipped with a message when `import ase` fails.
 */
import { describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll } from 'vitest';
import { checkErrors } from '../../src/gates/errors.js';

const hasAse = spawnSync('/usr/bin/python3', ['-c', 'import ase, numpy'], { encoding: 'utf8' }).status === 0;
if (!hasAse) console.warn('errors-stress.test.ts: skipped, /usr/bin/python3 cannot import ase and numpy (Debian python3-ase)');

const dir = mkdtempSync(join(tmpdir(), 'ratchet-errors-stress-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const SCRIPT = String.raw`
import json, sys
import numpy as np
from ase.build import bulk
from ase.calculators.emt import EMT
from ase.calculators.singlepoint import SinglePointCalculator
from ase.io import write
from ase import units
ref_path, pred_path = sys.argv[1], sys.argv[2]
rng = np.random.default_rng(11)
refs, preds, d, dp = [], [], [], []
for k in range(12):
    a = bulk('Cu', 'fcc', a=3.61, cubic=True).repeat((2, 2, 2))
    eps = rng.uniform(-0.01, 0.01, (3, 3)); eps = (eps + eps.T) / 2
    a.set_cell(np.dot(a.cell, np.eye(3) + eps), scale_atoms=True)
    a.rattle(0.03, seed=k)
    a.calc = EMT()
    s_ref = a.get_stress()          # Voigt xx yy zz yz xz xy, eV/A^3
    e_ref, f_ref = a.get_potential_energy(), a.get_forces()
    b = a.copy(); b.calc = EMT()
    b.set_cell(a.cell * 1.003, scale_atoms=True)
    s_pred = b.get_stress()
    e_pred, f_pred = b.get_potential_energy(), b.get_forces()
    r = a.copy(); r.calc = SinglePointCalculator(r, energy=e_ref, forces=f_ref, stress=s_ref)
    p = a.copy(); p.calc = SinglePointCalculator(p, energy=e_pred, forces=f_pred, stress=s_pred)
    refs.append(r); preds.append(p)
    d.append((s_pred - s_ref) / units.GPa)
    dp.append((-s_pred[:3].sum() / 3 + s_ref[:3].sum() / 3) / units.GPa)
write(ref_path, refs, format='extxyz')
write(pred_path, preds, format='extxyz')
d = np.array(d); dp = np.array(dp)
print(json.dumps({
  'stress_rmse': float(np.sqrt(np.mean(d ** 2))),
  'stress_mae': float(np.mean(np.abs(d))),
  'pressure_rmse': float(np.sqrt(np.mean(dp ** 2))),
  'pressure_mae': float(np.mean(np.abs(dp))),
  'pressure_mean': float(np.mean(dp)),
  'frames': len(refs),
}))
`;

describe.skipIf(!hasAse)('errors: stress against ASE EMT and numpy', () => {
  const ref = join(dir, 'ref.xyz');
  const pred = join(dir, 'pred.xyz');
  const want = hasAse
    ? (JSON.parse(execFileSync('/usr/bin/python3', ['-c', SCRIPT, ref, pred], { encoding: 'utf8' })) as Record<string, number>)
    : {};

  it('stress RMSE/MAE (GPa, 6 Voigt components) and pressure errors agree with numpy', async () => {
    const res = await checkErrors(ref, pred);
    const f = res.figures;
    expect(f.stress_frames).toBe(want.frames);
    // ASE's GPa uses CODATA 2014's elementary charge, ratchet CODATA 2018's: 1e-8 relative at most
    expect(f.stress_rmse_GPa! / want.stress_rmse).toBeCloseTo(1, 6);
    expect(f.stress_mae_GPa! / want.stress_mae).toBeCloseTo(1, 6);
    expect(f.pressure_rmse_GPa! / want.pressure_rmse).toBeCloseTo(1, 6);
    expect(f.pressure_mae_GPa! / want.pressure_mae).toBeCloseTo(1, 6);
    expect(f.pressure_mean_error_GPa! / want.pressure_mean).toBeCloseTo(1, 6);
    // a larger cell has a lower pressure under EMT: the prediction's pressure error is negative
    expect(f.pressure_mean_error_GPa!).toBeLessThan(0);
    expect(f.limits.stress_rmse).toEqual({ warn: null, fail: null });
  });

  it('a stress limit is judged when set: below the RMSE fails, above passes', async () => {
    const below = await checkErrors(ref, pred, { limits: { stress_rmse: want.stress_rmse * 0.9, force_rmse: 1e6, energy_rmse: 1e6 } });
    expect(below.verdict).toBe('fail');
    expect(below.reasons.find((r) => r.startsWith('stress RMSE'))).toMatch(/^stress RMSE [\d.]+ GPa is above the fail limit [\d.]+ GPa$/);
    const above = await checkErrors(ref, pred, { limits: { stress_rmse: want.stress_rmse * 1.1, force_rmse: 1e6, energy_rmse: 1e6 } });
    expect(above.reasons.some((r) => r.startsWith('stress RMSE') && r.includes('above'))).toBe(false);
  });
});
