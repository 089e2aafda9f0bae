"""Label stage of the water-xtb example: GFN2-xTB energies and forces from Debian's xtb.

For each input frame: write it as plain XYZ into a scratch folder, run `xtb frame.xyz --grad` there,
and read the `gradient` file xtb writes (Turbomole format: the SCF energy in Hartree on the cycle line,
then N coordinate lines in Bohr and N gradient lines in Hartree/Bohr). Converted with CODATA 2018:
energy eV = Eh * 27.211386245988, force eV/Å = -gradient * 27.211386245988 / 0.529177210903.
Every frame keeps its atoms, info and per-atom arrays except what a model produced (forces_<m>,
energy_<m>, total_energy), and gets info `energy` (eV) and per-atom `forces` (eV/Å), in input order.

Contract: input `frames`, output `labeled`; params `charge` (0), `uhf` (unpaired electrons, 0),
`xtb` (the program, default "xtb"), `accuracy` (xtb --acc, default 1.0).
Runs in the task directory (scratch folders go under ./xtb-scratch/ and are removed).
"""
import os
import re
import shutil
import subprocess
import sys
import time

# ratchet_task.py: beside this file in a copy made by `ratchet init --example water-xtb`, else the package's python/.
sys.path.append(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "python"))
import ratchet_task as rt  # noqa: E402

MODEL_KEYS = re.compile(r"^(forces|energy)_\d+$")


def read_gradient(path: str, n: int):
    """(energy in Hartree, gradient as N rows of 3 in Hartree/Bohr) from xtb's Turbomole `gradient` file."""
    with open(path, encoding="utf-8") as fh:
        lines = [ln for ln in fh.read().splitlines() if ln.strip()]
    try:
        start = max(i for i, ln in enumerate(lines) if "cycle =" in ln)
    except ValueError:
        raise rt.TaskError(f"{path}: no 'cycle =' line (expected xtb's gradient file)") from None
    m = re.search(r"energy\s*=\s*(\S+)", lines[start])
    if not m:
        raise rt.TaskError(f"{path}: line '{lines[start].strip()}': expected 'SCF energy = <Hartree>'")
    energy = float(m.group(1).replace("D", "E"))
    grad_lines = lines[start + 1 + n:start + 1 + 2 * n]
    if len(grad_lines) != n:
        raise rt.TaskError(f"{path}: expected {n} gradient lines after {n} coordinate lines, found {len(grad_lines)}")
    grad = [[float(x.replace("D", "E")) for x in ln.split()[:3]] for ln in grad_lines]
    return energy, grad


def label_frame(frame, workdir, xtb, charge, uhf, acc):
    os.makedirs(workdir, exist_ok=True)
    n = len(frame)
    with open(os.path.join(workdir, "frame.xyz"), "w", encoding="utf-8") as fh:
        fh.write(f"{n}\n\n" + "".join(f"{s} {x!r} {y!r} {z!r}\n" for s, (x, y, z) in zip(frame.symbols, frame.positions)))
    cmd = [xtb, "frame.xyz", "--grad", "--gfn", "2", "--chrg", str(charge), "--uhf", str(uhf), "--acc", str(acc)]
    env = dict(os.environ, OMP_NUM_THREADS=os.environ.get("OMP_NUM_THREADS", "1"), OMP_STACKSIZE=os.environ.get("OMP_STACKSIZE", "500M"))
    p = subprocess.run(cmd, cwd=workdir, env=env, capture_output=True, text=True)
    if p.returncode != 0 or not os.path.exists(os.path.join(workdir, "gradient")):
        tail = "\n".join((p.stdout + p.stderr).strip().splitlines()[-8:])
        raise rt.TaskError(f"{' '.join(cmd)} (in {workdir}) exited {p.returncode}:\n{tail}")
    e_h, grad = read_gradient(os.path.join(workdir, "gradient"), n)
    out = rt.Frame(frame.symbols, frame.positions, frame.cell, frame.pbc,
                   {k: v for k, v in frame.info.items() if not MODEL_KEYS.match(k) and k not in ("energy", "total_energy")},
                   {k: v for k, v in frame.arrays.items() if not MODEL_KEYS.match(k) and k != "forces"})
    out.info["energy"] = e_h * rt.HARTREE_EV
    out.arrays["forces"] = [[-g * rt.HARTREE_EV / rt.BOHR_A for g in row] for row in grad]
    return out


def main():
    task = rt.Task.load()
    frames = rt.read_frames(task.input("frames"))
    xtb = task.param("xtb", "xtb", str)
    if shutil.which(xtb) is None:
        raise rt.TaskError(f"{task.source}: params.xtb: program {xtb!r} not found on PATH (apt-get install xtb)")
    charge = task.param("charge", 0, int)
    uhf = task.param("uhf", 0, int)
    acc = task.param("accuracy", 1.0, float)
    scratch = os.path.join(task.dir, "xtb-scratch")
    t0 = time.time()
    out = []
    for k, f in enumerate(frames):
        if any(f.pbc):
            raise rt.TaskError(f"{task.input('frames')}: frame {k}: periodic frame (pbc {f.pbc}); this labeler runs xtb on molecules in vacuum")
        out.append(label_frame(f, os.path.join(scratch, str(k)), xtb, charge, uhf, acc))
    shutil.rmtree(scratch, ignore_errors=True)
    path = task.output("labeled")
    rt.write_frames(path, out)
    print(f"label: {len(out)} frames labeled with GFN2-xTB in {time.time() - t0:.2f} s -> {path}")


if __name__ == "__main__":
    try:
        main()
    except (rt.TaskError, rt.XyzError, ValueError) as err:
        rt.fail(str(err))
