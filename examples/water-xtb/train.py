"""Train stage of the water-xtb example: one committee member (see model.py) fitted with numpy.

Contract: input `training_set` (extended XYZ with info `energy` in eV and per-atom `forces` in eV/Å),
output `model` (JSON); params `member`, `bootstrap` (from the campaign's committee), the task seed, and
optional `degree` (4), `sigma_e` (eV/atom, 0.001), `sigma_f` (eV/Å, 0.02), `lambda` (1e-6), `prior` (0.5).
"""
import os
import sys
import time

# ratchet_task.py: beside this file in a copy made by `ratchet init --example water-xtb`, else the package's python/.
sys.path.append(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "python"))
import json  # noqa: E402

import numpy as np  # noqa: E402

import model as pot  # noqa: E402
import ratchet_task as rt  # noqa: E402


def main():
    task = rt.Task.load()
    path = task.input("training_set")
    frames = []
    for k, f in enumerate(rt.read_frames(path)):
        e = f.info.get("energy")
        if not isinstance(e, (int, float)) or isinstance(e, bool):
            raise rt.TaskError(f"{path}: frame {k}: expected a number in info key 'energy' (eV), found {e!r}")
        if "forces" not in f.arrays:
            raise rt.TaskError(f"{path}: frame {k}: expected per-atom 'forces' (eV/Å)")
        frames.append((f.symbols, np.asarray(f.positions), float(e), np.asarray(f.arrays["forces"], dtype=float)))
    if not frames:
        raise rt.TaskError(f"{path}: no frames to train on")
    t0 = time.time()
    member = task.param("member", 0, int)
    seed = task.seed if task.seed is not None else member
    m = pot.fit(frames, member, seed, task.param("bootstrap", False, bool),
                sigma_e=task.param("sigma_e", 0.001, float), sigma_f=task.param("sigma_f", 0.02, float),
                lam=task.param("lambda", 1e-6, float), prior=task.param("prior", 0.5, float),
                degree=task.param("degree", 4, int))
    m["task"] = task.task
    out = task.output("model")
    with open(out, "w", encoding="utf-8") as fh:
        json.dump(m, fh)
    r = m["train_rmse"]
    print(f"train: member {member} seed {seed}: {len(frames)} frames ({m['distinct_frames']} distinct), train RMSE "
          f"{r['energy_meV_per_atom']:.2f} meV/atom, {r['force_meV_per_A']:.1f} meV/Å, {time.time() - t0:.2f} s -> {out}")


if __name__ == "__main__":
    try:
        main()
    except (rt.TaskError, rt.XyzError, ValueError) as err:
        rt.fail(str(err))
