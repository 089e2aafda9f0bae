"""Helper of companion.test.ts: writes frames with python/ratchet_task.py and reports what was written
and what each reader (the module's own, ASE's) reads back, as JSON on stdout.

usage: companion_roundtrip.py OUT_DIR
"""
import json
import math
import os
import sys

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "python"))
import ratchet_task as rt  # noqa: E402

out = sys.argv[1]
report = {"have_ase": rt.have_ase(), "ase_time_unit_fs": rt.ASE_TIME_UNIT_FS}

# 1. A periodic frame and a molecule in vacuum, with the keys ratchet reads and a committee.
water = rt.Frame(["O", "H", "H"], [[0.0, 0.0, 0.1173], [0.0, 0.7572, -0.4692], [0.0, -0.7572, -0.4692]],
                 info={"time": 12.5, "step": 25, "temperature": 301.25, "total_energy": -137.5, "label": "a b \"c\""})
rt.set_committee(water, [[[0.1, -0.2, 0.3], [1e-7, 2.5e-12, 0.0], [-0.1, 0.2, -0.3]],
                  [[0.12, -0.18, 0.31], [0.0, 0.01, 0.0], [-0.12, 0.17, -0.31]]], energies=[-137.1, -137.3])
water.arrays["velocities"] = [[0.001, -0.002, 0.0], [0.01, 0.02, -0.03], [-0.011, -0.018, 0.03]]
crystal = rt.Frame(["Ar", "Ar"], [[0, 0, 0], [2.625, 2.625, 0]], cell=[[5.25, 0, 0], [0, 5.25, 0], [0, 0, 5.25]],
                   pbc=[True, True, True], info={"energy": -0.1234567890123, "source_frame": 3, "stopped": "contact"},
                   arrays={"forces": [[0.5, 0, 0], [-0.5, 0, 0]], "tags": [1, 2]})
path = os.path.join(out, "written.xyz")
rt.write_frames(path, [water, crystal])


def frame_json(f):
    return {"symbols": f.symbols, "positions": f.positions, "cell": f.cell, "pbc": f.pbc, "info": f.info, "arrays": f.arrays}


report["own"] = [frame_json(f) for f in rt.read_frames(path)]

if rt.have_ase():
    import ase.io
    frames = ase.io.read(path, index=":", format="extxyz")
    ase_frames = []
    for a in frames:
        calc = a.calc.results if a.calc is not None else {}
        arrays = {k: v.tolist() for k, v in a.arrays.items() if k not in ("numbers", "positions")}
        if "forces" in calc:
            arrays["forces"] = calc["forces"].tolist()
        info = {k: (v.tolist() if hasattr(v, "tolist") else v) for k, v in a.info.items()}
        if "energy" in calc:
            info["energy"] = float(calc["energy"])
        ase_frames.append({"symbols": a.get_chemical_symbols(), "positions": a.positions.tolist(),
                           "cell": a.cell.array.tolist() if a.pbc.any() else None, "pbc": a.pbc.tolist(), "info": info, "arrays": arrays})
    report["ase"] = ase_frames

    # 2. From ase.Atoms: momenta become velocities in Å/fs; the frame read back by ASE has the same momenta.
    from ase import Atoms
    from ase.calculators.singlepoint import SinglePointCalculator
    atoms = Atoms("OH2", positions=water.positions)
    atoms.set_momenta([[0.5, -0.2, 0.1], [0.03, 0.2, -0.1], [0.0, -0.05, 0.02]])
    atoms.calc = SinglePointCalculator(atoms, energy=-137.25, forces=[[0.1, 0.2, 0.3], [0, 0, 0], [-0.1, -0.2, -0.3]])
    p2 = os.path.join(out, "from-atoms.xyz")
    rt.write_frames(p2, [atoms])
    back = rt.read_frames(p2)[0]
    report["from_atoms"] = {"momenta": atoms.get_momenta().tolist(), "masses": atoms.get_masses().tolist(),
                            "velocities": back.arrays["velocities"], "energy": back.info["energy"], "forces": back.arrays["forces"]}
    again = rt.frame_to_atoms(back)
    report["from_atoms"]["momenta_again"] = again.get_momenta().tolist()
    report["from_atoms"]["energy_again"] = again.get_potential_energy()

json.dump(report, sys.stdout)
