/**
 * Element data: symbols, standard atomic weights, covalent radii.
 *
 * Symbols: elements 1..118 (IUPAC names as of 2016).
 *
 * Atomic weights (u): the IUPAC abridged standard atomic weights (five significant figures; for elements
 * whose standard atomic weight is an interval, the conventional value), Commission on Isotopic Abundances and
 * Atomic Weights, "Standard atomic weights of the elements 2021", T. Prohaska et al., Pure Appl. Chem. 94 (2022) 573-600.
 * The values were written from memory of that table and cross-checked in test/atoms/elements.test.ts against
 * the independent table shipped with ASE (ase.data.atomic_masses, IUPAC 2016 values).
 * Elements with no stable isotope and no standard atomic weight (Tc, Pm, Po and Z >= 84 except Th, Pa, U) carry
 * the mass number of their longest-lived (or best-known) isotope, as printed in brackets in periodic tables
 * (common practice); `hasStandardWeight(symbol)` tells which is which.
 *
 * Covalent radii (Å): B. Cordero, V. Gómez, A. E. Platero-Prats, M. Revés, J. Echeverría, E. Cremades,
 * F. Barragán, S. Alvarez, "Covalent radii revisited", Dalton Trans. 2008, 2832-2838, Table 2, elements 1..96.
 * Where the paper gives several values: C uses sp3 (0.76; sp2 0.73, sp 0.69); Mn, Fe, Co use the low-spin
 * values (1.39, 1.32, 1.26; high-spin 1.61, 1.52, 1.50 are in COVALENT_RADII_HIGH_SPIN). Values written from
 * memory of Table 2 and cross-checked against ASE's ase.data.covalent_radii (which reproduces the same table with
 * the same choices).
 */

export const SYMBOLS: readonly string[] = [
  'H', 'He',
  'Li', 'Be', 'B', 'C', 'N', 'O', 'F', 'Ne',
  'Na', 'Mg', 'Al', 'Si', 'P', 'S', 'Cl', 'Ar',
  'K', 'Ca', 'Sc', 'Ti', 'V', 'Cr', 'Mn', 'Fe', 'Co', 'Ni', 'Cu', 'Zn', 'Ga', 'Ge', 'As', 'Se', 'Br', 'Kr',
  'Rb', 'Sr', 'Y', 'Zr', 'Nb', 'Mo', 'Tc', 'Ru', 'Rh', 'Pd', 'Ag', 'Cd', 'In', 'Sn', 'Sb', 'Te', 'I', 'Xe',
  'Cs', 'Ba', 'La', 'Ce', 'Pr', 'Nd', 'Pm', 'Sm', 'Eu', 'Gd', 'Tb', 'Dy', 'Ho', 'Er', 'Tm', 'Yb', 'Lu',
  'Hf', 'Ta', 'W', 'Re', 'Os', 'Ir', 'Pt', 'Au', 'Hg', 'Tl', 'Pb', 'Bi', 'Po', 'At', 'Rn',
  'Fr', 'Ra', 'Ac', 'Th', 'Pa', 'U', 'Np', 'Pu', 'Am', 'Cm', 'Bk', 'Cf', 'Es', 'Fm', 'Md', 'No', 'Lr',
  'Rf', 'Db', 'Sg', 'Bh', 'Hs', 'Mt', 'Ds', 'Rg', 'Cn', 'Nh', 'Fl', 'Mc', 'Lv', 'Ts', 'Og',
];

/** Atomic weights in u, index z-1. Negative entries mark mass numbers of elements without a standard atomic weight (stored as -A). */
const WEIGHTS: readonly number[] = [
  1.008, 4.0026,
  6.94, 9.0122, 10.81, 12.011, 14.007, 15.999, 18.998, 20.18,
  22.99, 24.305, 26.982, 28.085, 30.974, 32.06, 35.45, 39.95,
  39.098, 40.078, 44.956, 47.867, 50.942, 51.996, 54.938, 55.845, 58.933, 58.693, 63.546, 65.38, 69.723, 72.63,
  74.922, 78.971, 79.904, 83.798,
  85.468, 87.62, 88.906, 91.224, 92.906, 95.95, -97, 101.07, 102.91, 106.42, 107.87, 112.41, 114.82, 118.71,
  121.76, 127.6, 126.9, 131.29,
  132.91, 137.33, 138.91, 140.12, 140.91, 144.24, -145, 150.36, 151.96, 157.25, 158.93, 162.5, 164.93, 167.26,
  168.93, 173.05, 174.97,
  178.49, 180.95, 183.84, 186.21, 190.23, 192.22, 195.08, 196.97, 200.59, 204.38, 207.2, 208.98, -209, -210, -222,
  -223, -226, -227, 232.04, 231.04, 238.03, -237, -244, -243, -247, -247, -251, -252, -257, -258, -259, -262,
  -267, -268, -269, -270, -269, -278, -281, -282, -285, -286, -289, -290, -293, -294, -294,
];

/** Cordero et al. 2008 covalent radii in Å, index z-1, elements 1..96. */
const RADII: readonly number[] = [
  0.31, 0.28,
  1.28, 0.96, 0.84, 0.76, 0.71, 0.66, 0.57, 0.58,
  1.66, 1.41, 1.21, 1.11, 1.07, 1.05, 1.02, 1.06,
  2.03, 1.76, 1.70, 1.60, 1.53, 1.39, 1.39, 1.32, 1.26, 1.24, 1.32, 1.22, 1.22, 1.20, 1.19, 1.20, 1.20, 1.16,
  2.20, 1.95, 1.90, 1.75, 1.64, 1.54, 1.47, 1.46, 1.42, 1.39, 1.45, 1.44, 1.42, 1.39, 1.39, 1.38, 1.39, 1.40,
  2.44, 2.15, 2.07, 2.04, 2.03, 2.01, 1.99, 1.98, 1.98, 1.96, 1.94, 1.92, 1.92, 1.89, 1.90, 1.87, 1.87,
  1.75, 1.70, 1.62, 1.51, 1.44, 1.41, 1.36, 1.36, 1.32, 1.45, 1.46, 1.48, 1.40, 1.50, 1.50,
  2.60, 2.21, 2.15, 2.06, 2.00, 1.96, 1.90, 1.87, 1.80, 1.69,
];

/** Cordero et al. 2008 high-spin radii (Å) for the elements where Table 2 lists both spin states. */
export const COVALENT_RADII_HIGH_SPIN: Readonly<Record<string, number>> = { Mn: 1.61, Fe: 1.52, Co: 1.5 };
/** Cordero et al. 2008 radii of carbon by hybridisation (Å); covalentRadius('C') returns sp3. */
export const CARBON_RADII: Readonly<Record<'sp3' | 'sp2' | 'sp', number>> = { sp3: 0.76, sp2: 0.73, sp: 0.69 };

/** Highest atomic number with a symbol. */
export const MAX_Z = SYMBOLS.length;
/** Highest atomic number with a covalent radius. */
export const MAX_Z_RADIUS = RADII.length;

const Z_OF = new Map<string, number>(SYMBOLS.map((s, i) => [s, i + 1]));

/** Thrown for an unknown element symbol or atomic number. */
export class ElementError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ElementError';
  }
}

function unknownSymbol(symbol: string): never {
  const hint = typeof symbol === 'string' && symbol.length > 0
    ? (() => {
        const fixed = symbol[0].toUpperCase() + symbol.slice(1).toLowerCase();
        return fixed !== symbol && Z_OF.has(fixed) ? ` (did you mean '${fixed}'? symbols are case-sensitive)` : '';
      })()
    : '';
  throw new ElementError(`unknown element symbol '${symbol}': expected a chemical symbol such as H, He, Li ... Og${hint}`);
}

/** Atomic number of a chemical symbol (case-sensitive, e.g. 'Fe'); throws ElementError naming an unknown symbol. */
export function atomicNumber(symbol: string): number {
  const z = Z_OF.get(symbol);
  if (z === undefined) unknownSymbol(symbol);
  return z;
}

/** True when the symbol is a known element. */
export function isElement(symbol: string): boolean {
  return Z_OF.has(symbol);
}

/** Chemical symbol of atomic number z (1..118). */
export function symbolOf(z: number): string {
  if (!Number.isInteger(z) || z < 1 || z > MAX_Z) {
    throw new ElementError(`unknown atomic number ${z}: expected an integer from 1 to ${MAX_Z}`);
  }
  return SYMBOLS[z - 1];
}

/**
 * Atomic mass in u: the IUPAC 2021 abridged standard atomic weight (conventional value for interval elements);
 * for elements without one, the mass number of the longest-lived isotope.
 */
export function atomicMass(symbol: string): number {
  return Math.abs(WEIGHTS[atomicNumber(symbol) - 1]);
}

/** True when IUPAC gives the element a standard atomic weight (false: atomicMass is a mass number). */
export function hasStandardWeight(symbol: string): boolean {
  return WEIGHTS[atomicNumber(symbol) - 1] > 0;
}

/** Cordero et al. 2008 covalent radius in Å (C: sp3; Mn, Fe, Co: low spin). Elements 1..96. */
export function covalentRadius(symbol: string): number {
  const z = atomicNumber(symbol);
  if (z > RADII.length) {
    throw new ElementError(`no covalent radius for '${symbol}' (Z = ${z}): Cordero et al. 2008 covers elements 1 to ${RADII.length}`);
  }
  return RADII[z - 1];
}

/** Per-atom masses (u) for a list of symbols; errors name the first unknown symbol and its atom index. */
export function massesOf(species: readonly string[]): Float64Array {
  return perAtom(species, atomicMass);
}

/** Per-atom covalent radii (Å) for a list of symbols; errors name the first unknown symbol and its atom index. */
export function covalentRadiiOf(species: readonly string[]): Float64Array {
  return perAtom(species, covalentRadius);
}

function perAtom(species: readonly string[], f: (s: string) => number): Float64Array {
  const out = new Float64Array(species.length);
  const cache = new Map<string, number>();
  for (let a = 0; a < species.length; a++) {
    const s = species[a];
    let v = cache.get(s);
    if (v === undefined) {
      try {
        v = f(s);
      } catch (e) {
        if (e instanceof ElementError) throw new ElementError(`atom ${a}: ${e.message}`);
        throw e;
      }
      cache.set(s, v);
    }
    out[a] = v;
  }
  return out;
}
