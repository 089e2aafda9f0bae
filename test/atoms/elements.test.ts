import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import {
  CARBON_RADII, COVALENT_RADII_HIGH_SPIN, ElementError, MAX_Z, MAX_Z_RADIUS, SYMBOLS, atomicMass, atomicNumber,
  covalentRadiiOf, covalentRadius, hasStandardWeight, massesOf, symbolOf,
} from '../../src/atoms/elements.js';

describe('symbols and atomic numbers', () => {
  it('covers elements 1..118 and round-trips', () => {
    expect(MAX_Z).toBe(118);
    for (let z = 1; z <= MAX_Z; z++) expect(atomicNumber(symbolOf(z))).toBe(z);
    expect(new Set(SYMBOLS).size).toBe(118);
  });
  it('spot values (IUPAC periodic table)', () => {
    expect(atomicNumber('H')).toBe(1);
    expect(atomicNumber('Fe')).toBe(26);
    expect(atomicNumber('Ar')).toBe(18);
    expect(atomicNumber('U')).toBe(92);
    expect(atomicNumber('Cm')).toBe(96);
    expect(symbolOf(118)).toBe('Og');
    expect(symbolOf(79)).toBe('Au');
  });
  it('names an unknown symbol and suggests the capitalised one', () => {
    expect(() => atomicNumber('Xx')).toThrow(ElementError);
    expect(() => atomicNumber('Xx')).toThrow(/unknown element symbol 'Xx'/);
    expect(() => atomicMass('FE')).toThrow(/'FE'.*did you mean 'Fe'/);
    expect(() => covalentRadius('')).toThrow(/unknown element symbol ''/);
    expect(() => symbolOf(0)).toThrow(/unknown atomic number 0/);
    expect(() => symbolOf(119)).toThrow(/1 to 118/);
    expect(() => massesOf(['H', 'O', 'Q'])).toThrow(/atom 2: unknown element symbol 'Q'/);
  });
});

describe('standard atomic weights', () => {
  // Source: IUPAC CIAAW, abridged standard atomic weights, "Standard atomic weights of the elements 2021",
  // T. Prohaska et al., Pure Appl. Chem. 94 (2022) 573 (values as in that table; conventional values for interval elements).
  it('spot values', () => {
    expect(atomicMass('H')).toBe(1.008);
    expect(atomicMass('C')).toBe(12.011);
    expect(atomicMass('O')).toBe(15.999);
    expect(atomicMass('Ar')).toBe(39.95);
    expect(atomicMass('Fe')).toBe(55.845);
    expect(atomicMass('Pb')).toBe(207.2);
    expect(atomicMass('U')).toBe(238.03);
    expect(hasStandardWeight('Tc')).toBe(false);
    expect(atomicMass('Tc')).toBe(97); // mass number of the longest-lived isotope, as in periodic tables
    expect(hasStandardWeight('Th')).toBe(true);
  });
  it('masses of a water molecule', () => {
    const m = massesOf(['O', 'H', 'H']);
    expect(m[0] + m[1] + m[2]).toBeCloseTo(18.015, 9);
  });
});

describe('Cordero et al. 2008 covalent radii', () => {
  // Source: B. Cordero et al., "Covalent radii revisited", Dalton Trans. 2008, 2832-2838, Table 2.
  it('spot values', () => {
    expect(covalentRadius('H')).toBe(0.31);
    expect(covalentRadius('C')).toBe(0.76); // sp3
    expect(CARBON_RADII).toEqual({ sp3: 0.76, sp2: 0.73, sp: 0.69 });
    expect(covalentRadius('N')).toBe(0.71);
    expect(covalentRadius('O')).toBe(0.66);
    expect(covalentRadius('Si')).toBe(1.11);
    expect(covalentRadius('Ar')).toBe(1.06);
    expect(covalentRadius('Fe')).toBe(1.32); // low spin
    expect(COVALENT_RADII_HIGH_SPIN.Fe).toBe(1.52);
    expect(covalentRadius('Mn')).toBe(1.39);
    expect(COVALENT_RADII_HIGH_SPIN.Mn).toBe(1.61);
    expect(covalentRadius('Cs')).toBe(2.44);
    expect(covalentRadius('Au')).toBe(1.36);
    expect(covalentRadius('Cm')).toBe(1.69);
  });
  it('covers 1..96 and refuses beyond with a clear message', () => {
    expect(MAX_Z_RADIUS).toBe(96);
    expect(() => covalentRadius('Bk')).toThrow(/no covalent radius for 'Bk' \(Z = 97\)/);
    expect(Array.from(covalentRadiiOf(['O', 'H']))).toEqual([0.66, 0.31]);
  });
});

describe('whole tables against ASE (independent library)', () => {
  // Independent cross-check: Debian's python3-ase, ase.data (covalent_radii reproduces Cordero 2008 with C sp3 and
  // low-spin Mn/Fe/Co; atomic_masses are IUPAC 2016 values with more digits).
  const out = execFileSync('/usr/bin/python3', [
    '-c',
    'import json; from ase.data import chemical_symbols as s, atomic_masses as m, covalent_radii as r; ' +
      'print(json.dumps([s[1:119], list(m[1:119]), list(r[1:97])]))',
  ]).toString();
  const [syms, masses, radii] = JSON.parse(out) as [string[], number[], number[]];
  it('symbols 1..118 agree', () => {
    expect(syms).toEqual([...SYMBOLS]);
  });
  it('covalent radii 1..96 agree exactly', () => {
    for (let z = 1; z <= 96; z++) expect(covalentRadius(symbolOf(z)), symbolOf(z)).toBe(radii[z - 1]);
  });
  it('atomic weights agree to the abridged precision (elements with a standard weight)', () => {
    for (let z = 1; z <= 96; z++) {
      const s = symbolOf(z);
      if (!hasStandardWeight(s)) continue;
      // abridged values carry 5 significant figures; conventional values of interval elements (e.g. Li 6.94) fewer
      expect(Math.abs(atomicMass(s) - masses[z - 1]) / masses[z - 1], s).toBeLessThan(3e-4);
    }
  });
});
