import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import {
  AMU_A2_PER_FS2_TO_EV, AMU_KG, AVOGADRO_PER_MOL, BOHR_A, EV_J, EV_TO_AMU_A2_PER_FS2, GAS_CONSTANT_J_PER_MOL_K,
  HARTREE_EV, HBAR_EV_S, H_J_S, KB_EV_PER_K, KB_J_PER_K, evToMeV, fsToPs, kineticEnergy, massDensity, meVToEv,
  numberDensity, psToFs, temperatureFromKinetic,
} from '../../src/atoms/units.js';

const rel = (a: number, b: number): number => Math.abs(a - b) / Math.abs(b);

describe('CODATA 2018 constants', () => {
  // Source: NIST, CODATA 2018 recommended values (E. Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021));
  // physics.nist.gov/cuu/Constants. Digits as printed there.
  it('match the published values', () => {
    expect(KB_EV_PER_K).toBe(8.617333262e-5);
    expect(AMU_KG).toBe(1.6605390666e-27);
    expect(EV_J).toBe(1.602176634e-19);
    expect(KB_J_PER_K).toBe(1.380649e-23);
    expect(AVOGADRO_PER_MOL).toBe(6.02214076e23);
    expect(H_J_S).toBe(6.62607015e-34);
    expect(BOHR_A).toBe(0.529177210903);
    expect(HARTREE_EV).toBe(27.211386245988);
  });

  it('are consistent with the exact SI defining constants', () => {
    // k_B/e (both exact since 2019) = 8.617 333 262... e-5 eV/K
    expect(rel(KB_J_PER_K / EV_J, KB_EV_PER_K)).toBeLessThan(1e-10);
    // R = N_A k_B (exact) = 8.314 462 618... J/(mol K)
    expect(rel(AVOGADRO_PER_MOL * KB_J_PER_K, GAS_CONSTANT_J_PER_MOL_K)).toBeLessThan(1e-10);
    // hbar = h / (2 pi), in eV s = 6.582 119 569... e-16
    expect(rel(H_J_S / (2 * Math.PI) / EV_J, HBAR_EV_S)).toBeLessThan(1e-9);
  });
});

describe('derived conversions', () => {
  it('u Å²/fs² to eV is 103.6427 (u (1e5 m/s)² / eV)', () => {
    expect(AMU_A2_PER_FS2_TO_EV).toBeCloseTo(103.6427, 4);
    expect(AMU_A2_PER_FS2_TO_EV * EV_TO_AMU_A2_PER_FS2).toBeCloseTo(1, 14);
  });

  it('agrees with ASE units built from CODATA 2018 (independent library)', () => {
    // Independent cross-check: Debian's python3-ase, ase.units.create_units('2018'); 1/fs² in ASE units is eV per u Å²/fs².
    const out = execFileSync('/usr/bin/python3', [
      '-c',
      "import ase.units as u, json; U=u.create_units('2018'); print(json.dumps([1/U['fs']**2, U['kB']]))",
    ]).toString();
    const [factor, kB] = JSON.parse(out) as [number, number];
    expect(rel(AMU_A2_PER_FS2_TO_EV, factor)).toBeLessThan(1e-12);
    expect(rel(KB_EV_PER_K, kB)).toBeLessThan(1e-9);
  });

  it('gives the rms speed of argon at 300 K computed in SI', () => {
    // sqrt(3 k_B T / m) in SI: m = 39.948 u; about 433 m/s (a textbook figure, from memory); checked exactly against SI here.
    const m = 39.948, T = 300;
    const vSI = Math.sqrt((3 * KB_J_PER_K * T) / (m * AMU_KG)); // m/s
    const vAfs = Math.sqrt((3 * KB_EV_PER_K * T) / (m * AMU_A2_PER_FS2_TO_EV)); // Å/fs
    expect(vAfs * 1e5).toBeCloseTo(vSI, 6); // 1 Å/fs = 1e5 m/s
    expect(vSI).toBeCloseTo(433, 0);
    // and back through equipartition: K = (3/2) k_B T for one atom
    const K = kineticEnergy([m], [vAfs, 0, 0]);
    expect(temperatureFromKinetic(K, 3)).toBeCloseTo(T, 9);
  });

  it('converts eV/meV and ps/fs', () => {
    expect(evToMeV(0.0125)).toBeCloseTo(12.5, 12);
    expect(meVToEv(12.5)).toBeCloseTo(0.0125, 15);
    expect(psToFs(2)).toBe(2000);
    expect(fsToPs(500)).toBe(0.5);
  });

  it('liquid water at 1 g/cm³ holds about 0.1 atoms/Å³', () => {
    // common practice check value (design notes); H2O molar mass 18.015 g/mol (IUPAC weights)
    const n = numberDensity(1, 18.015, 3);
    expect(n).toBeGreaterThan(0.0995);
    expect(n).toBeLessThan(0.1008);
    // inverse: mass density of 1/0.1 Å³ per atom of water
    expect(massDensity((18.015 * 1000) / 3, 1000 / n)).toBeCloseTo(1, 9);
  });

  it('rejects a non-positive number of degrees of freedom and mismatched arrays', () => {
    expect(() => temperatureFromKinetic(1, 0)).toThrow(/degrees of freedom/);
    expect(() => kineticEnergy([1, 2], [0, 0, 0])).toThrow(/expected 6 velocity components/);
  });
});
