/**
 * Physical constants and unit conversions.
 *
 * Constants are the CODATA 2018 recommended values as published by NIST
 * (E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA recommended values of the
 * fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010 (2021); physics.nist.gov/constants).
 * Since the 2019 SI redefinition k_B, e, N_A, h and c are exact; the others carry uncertainty.
 *
 * Project units (data contract): length Å, energy eV, time fs, mass u (dalton), temperature K.
 */

// ---- exact SI defining constants ----
/** Speed of light in vacuum, m/s (exact). */
export const C_M_PER_S = 299_792_458;
/** Planck constant, J s (exact). */
export const H_J_S = 6.62607015e-34;
/** Elementary charge, C (exact); numerically also 1 eV in J. */
export const E_CHARGE_C = 1.602176634e-19;
/** 1 eV in J (exact). */
export const EV_J = 1.602176634e-19;
/** Boltzmann constant, J/K (exact). */
export const KB_J_PER_K = 1.380649e-23;
/** Avogadro constant, 1/mol (exact). */
export const AVOGADRO_PER_MOL = 6.02214076e23;

// ---- derived / measured (CODATA 2018) ----
/** Boltzmann constant in eV/K (CODATA 2018: 8.617 333 262... e-5, exact to the digits given). */
export const KB_EV_PER_K = 8.617333262e-5;
/** Molar gas constant, J/(mol K) (CODATA 2018: 8.314 462 618...). */
export const GAS_CONSTANT_J_PER_MOL_K = 8.314462618;
/** Atomic mass constant, 1 u = 1 Da in kg (CODATA 2018: 1.660 539 066 60(50) e-27). */
export const AMU_KG = 1.6605390666e-27;
/** Reduced Planck constant in eV s (CODATA 2018: 6.582 119 569... e-16). */
export const HBAR_EV_S = 6.582119569e-16;
/** Electron mass, kg (CODATA 2018: 9.109 383 7015(28) e-31). */
export const ELECTRON_MASS_KG = 9.1093837015e-31;
/** Bohr radius in Å (CODATA 2018: 0.529 177 210 903(80) e-10 m). */
export const BOHR_A = 0.529177210903;
/** Hartree energy in eV (CODATA 2018: 27.211 386 245 988(53)). */
export const HARTREE_EV = 27.211386245988;

// ---- length, time, energy scale factors ----
export const A_M = 1e-10;
export const FS_S = 1e-15;
export const FS_PER_PS = 1000;
export const MEV_PER_EV = 1000;
/** 1 kcal/mol in eV: 4184 J/mol / (N_A * e). */
export const KCAL_PER_MOL_EV = 4184 / (AVOGADRO_PER_MOL * EV_J);
/** 1 kJ/mol in eV. */
export const KJ_PER_MOL_EV = 1000 / (AVOGADRO_PER_MOL * EV_J);
/** 1 GPa in eV/Å^3. */
export const GPA_EV_PER_A3 = 1e9 * 1e-30 / EV_J;
/** 1 bar in eV/Å^3. */
export const BAR_EV_PER_A3 = 1e5 * 1e-30 / EV_J;

/**
 * Kinetic energy of m [u] moving at v [Å/fs]: (1/2) m v^2 [u Å^2/fs^2] times this factor is eV.
 * = u * (1e-10 m / 1e-15 s)^2 / eV = 103.642 696 ... (derived from CODATA 2018).
 */
export const AMU_A2_PER_FS2_TO_EV = (AMU_KG * (A_M / FS_S) ** 2) / EV_J;
/** Inverse: 1 eV expressed in u Å^2/fs^2. A force in eV/Å divided by a mass in u, times this, is Å/fs^2. */
export const EV_TO_AMU_A2_PER_FS2 = 1 / AMU_A2_PER_FS2_TO_EV;

/**
 * ASE's unit of time, Å·sqrt(u/eV), in fs: 1e5 · sqrt(u [kg] / eV [J]) = 10.1805 fs (derived from CODATA 2018).
 * ASE stores momenta in u·Å per this unit; velocity in Å/fs = momentum / mass / ASE_TIME_UNIT_FS.
 */
export const ASE_TIME_UNIT_FS = (A_M * Math.sqrt(AMU_KG / EV_J)) / FS_S;

/** Velocities [Å/fs] from ASE momenta [u·Å per ASE time unit] and masses [u] (3 momentum components per mass). */
export function momentaToVelocities(masses: ArrayLike<number>, momenta: ArrayLike<number>): Float64Array {
  const n = masses.length;
  if (momenta.length !== 3 * n) throw new Error(`momentaToVelocities: expected ${3 * n} momentum components for ${n} masses, found ${momenta.length}`);
  const v = new Float64Array(3 * n);
  for (let a = 0; a < n; a++) for (let c = 0; c < 3; c++) v[3 * a + c] = momenta[3 * a + c] / masses[a] / ASE_TIME_UNIT_FS;
  return v;
}

// ---- conversions ----
export const evToMeV = (ev: number): number => ev * MEV_PER_EV;
export const meVToEv = (mev: number): number => mev / MEV_PER_EV;
export const psToFs = (ps: number): number => ps * FS_PER_PS;
export const fsToPs = (fs: number): number => fs / FS_PER_PS;

/** Temperature [K] that corresponds to a kinetic energy [eV] shared by `dof` degrees of freedom (equipartition: K = dof k_B T / 2). */
export function temperatureFromKinetic(kineticEv: number, dof: number): number {
  if (!(dof > 0)) throw new Error(`temperatureFromKinetic: degrees of freedom must be positive, got ${dof}`);
  return (2 * kineticEv) / (dof * KB_EV_PER_K);
}

/** Kinetic energy [eV] of atoms with masses [u] and velocities [Å/fs] (3 per atom). */
export function kineticEnergy(masses: ArrayLike<number>, velocities: ArrayLike<number>): number {
  const n = masses.length;
  if (velocities.length !== 3 * n) {
    throw new Error(`kineticEnergy: expected ${3 * n} velocity components for ${n} masses, found ${velocities.length}`);
  }
  let sum = 0;
  for (let a = 0; a < n; a++) {
    const vx = velocities[3 * a], vy = velocities[3 * a + 1], vz = velocities[3 * a + 2];
    sum += masses[a] * (vx * vx + vy * vy + vz * vz);
  }
  return 0.5 * sum * AMU_A2_PER_FS2_TO_EV;
}

/** Number density [atoms/Å^3] of a substance of mass density [g/cm^3] whose formula unit has `molarMass` [g/mol] and `atomsPerUnit` atoms. */
export function numberDensity(massDensityGPerCm3: number, molarMassGPerMol: number, atomsPerUnit = 1): number {
  return ((massDensityGPerCm3 / molarMassGPerMol) * AVOGADRO_PER_MOL * atomsPerUnit) * 1e-24;
}

/** Mass density [g/cm^3] of `totalMassU` [u] in `volumeA3` [Å^3]. */
export function massDensity(totalMassU: number, volumeA3: number): number {
  // u -> g: 1 u = AMU_KG kg = AMU_KG * 1e3 g; Å^3 -> cm^3: 1e-24.
  return (totalMassU * AMU_KG * 1e3) / (volumeA3 * 1e-24);
}
