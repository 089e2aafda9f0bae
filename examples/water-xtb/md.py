"""Simulate stage of the water-xtb example: MD with ASE's integrators, driven by the committee mean.

Langevin (ase.md.langevin.Langevin) at the condition's temperature, or, for the validate stage's
constant-energy check (params.kind "nve"), ASE's VelocityVerlet after `equilibration_steps` Langevin
steps. Every `write_every` steps a frame is written with info `step`, `time` (fs), `energy` (committee
mean, eV), `energy_<m>`, `total_energy` (eV), `temperature` (K) and per-atom `velocities` (Å/fs,
from ASE's momenta: v = p / m / 10.1805 fs), `forces` (the mean, eV/Å) and `forces_0` ... `forces_{M-1}`.

Units: ASE's time unit is Å·sqrt(u/eV) = 10.1805 fs, so the time step is `timestep * ase.units.fs` and
the friction `friction / ase.units.fs` (params in fs and 1/fs).

Contract: inputs `start` and `model_0` ... `model_{M-1}`, output `trajectory`; params `temperature` (K),
`steps`, `timestep` (fs), `write_every`, optional `friction` (1/fs, 0.01), `min_distance` (Å, 0.6: a
closer pair stops the run with info stopped="contact"); `pressure` is refused (molecule in vacuum).
A run stops early, writing what it has, at a contact or a non-finite number.
"""
import os
import sys
import time

# ratchet_task.py: beside this file in a copy made by `ratchet init --example water-xtb`, else the package's python/.
sys.path.append(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "python"))
import numpy as np  # noqa: E402

import model as pot  # noqa: E402
import ratchet_task as rt  # noqa: E402


def run(task, nve: bool):
    from ase import Atoms, units
    from ase.md.langevin import Langevin
    from ase.md.velocitydistribution import MaxwellBoltzmannDistribution, Stationary, ZeroRotation
    from ase.md.verlet import VelocityVerlet

    if task.params.get("pressure") is not None:
        raise rt.TaskError(f"{task.source}: params.pressure: this example runs molecules in vacuum at constant volume; remove the condition's pressure")
    paths = task.models()
    if not paths:
        raise rt.TaskError(f"{task.source}: inputs: expected the committee as inputs model_0, model_1, ...")
    models = [pot.load(p) for p in paths]
    start_path = task.input("start")
    start = rt.read_frames(start_path)[0]
    pot.check_atoms(models[0], start.symbols, start_path)
    temperature = task.param("temperature", kind=float)
    steps = task.param("steps", kind=int)
    dt = task.param("timestep", 0.5, float)
    every = task.param("write_every", 10, int)
    friction = task.param("friction", 0.01, float)
    min_distance = task.param("min_distance", 0.6, float)
    rng = np.random.default_rng(task.seed or 0)

    atoms = Atoms(start.symbols, positions=start.positions)
    calc = pot.make_calculator(models)
    atoms.calc = calc
    MaxwellBoltzmannDistribution(atoms, temperature_K=temperature, rng=rng)
    Stationary(atoms)
    ZeroRotation(atoms)
    thermostat = Langevin(atoms, dt * units.fs, temperature_K=temperature, friction=friction / units.fs, rng=rng)
    n = len(atoms)
    if nve:
        eq = task.param("equilibration_steps", 2000, int)
        thermostat.run(eq)
        Stationary(atoms)
        ZeroRotation(atoms)
        dyn = VelocityVerlet(atoms, dt * units.fs)
        dof = 3 * n - 6  # centre-of-mass momentum and rotation are zero at constant energy
    else:
        dyn = thermostat
        dof = 3 * n - 3  # ASE's Langevin keeps the centre of mass fixed (fixcm=True)
    frames = []
    stopped = None

    def snapshot(step):
        nonlocal stopped
        energies, forces = calc.members
        frame = rt.atoms_to_frame(atoms, energy=float(energies.mean()), forces=forces.mean(axis=0))
        ke = atoms.get_kinetic_energy()
        frame.info = {"step": step, "time": step * dt, "energy": float(energies.mean()),
                      "total_energy": float(energies.mean()) + ke, "temperature": 2 * ke / (dof * rt.KB_EV_PER_K)}
        rt.set_committee(frame, forces, energies)
        d = atoms.get_all_distances()
        d[np.diag_indices(n)] = np.inf
        if not np.all(np.isfinite(atoms.positions)) or not np.isfinite(frame.info["total_energy"]):
            stopped = "non_finite"
        elif d.min() < min_distance:
            stopped = "contact"
        if stopped:
            frame.info["stopped"] = stopped
        frames.append(frame)

    atoms.get_potential_energy()
    snapshot(0)
    step = 0
    while step < steps and not stopped:
        k = min(every, steps - step)
        dyn.run(k)
        step += k
        snapshot(step)
    out = task.output("trajectory")
    rt.write_frames(out, frames)
    temps = [f.info["temperature"] for f in frames[1:]] or [frames[0].info["temperature"]]
    return out, len(frames), float(np.mean(temps)), stopped or "completed", len(models)


def main():
    task = rt.Task.load()
    t0 = time.time()
    out, count, mean_t, how, m = run(task, nve=task.params.get("kind") == "nve")
    print(f"md: {task.params.get('kind') or 'nvt'} {task.param('temperature', kind=float):g} K, {task.param('steps', kind=int)} steps "
          f"with {m} models: {how}; mean T {mean_t:.1f} K, {count} frames in {time.time() - t0:.2f} s -> {out}")


if __name__ == "__main__":
    try:
        main()
    except (rt.TaskError, rt.XyzError, ValueError) as err:
        rt.fail(str(err))
