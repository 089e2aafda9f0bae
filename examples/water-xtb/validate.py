"""Validate stage of the water-xtb example (params.kind tells which task this is):

- "errors": the committee's predictions for the held-out frames (input `reference`), written as output
  `predictions` in the same order: info `energy` and per-atom `forces` hold the committee mean,
  `energy_<m>` and `forces_<m>` each member's values;
- "nve": a constant-energy run (md.py with ASE's VelocityVerlet) for the drift gate, output `trajectory`.
"""
import os
import sys
import time

# ratchet_task.py: beside this file in a copy made by `ratchet init --example water-xtb`, else the package's python/.
sys.path.append(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "python"))
import numpy as np  # noqa: E402

import md  # noqa: E402
import model as pot  # noqa: E402
import ratchet_task as rt  # noqa: E402


def errors(task):
    models = [pot.load(p) for p in task.models()]
    if not models:
        raise rt.TaskError(f"{task.source}: inputs: expected the committee as inputs model_0, model_1, ...")
    ref = task.input("reference")
    out = []
    for k, f in enumerate(rt.read_frames(ref)):
        pot.check_atoms(models[0], f.symbols, f"{ref}: frame {k}")
        res = [pot.predict(m, np.asarray(f.positions)) for m in models]
        p = rt.Frame(f.symbols, f.positions, f.cell, f.pbc, {k2: v for k2, v in f.info.items() if k2 != "energy"},
                     {k2: v for k2, v in f.arrays.items() if k2 != "forces"})
        rt.set_committee(p, [fr for _, fr in res], [e for e, _ in res])
        out.append(p)
    path = task.output("predictions")
    rt.write_frames(path, out)
    return f"validate: committee of {len(models)} predicted {len(out)} held-out frames -> {path}"


def main():
    task = rt.Task.load()
    t0 = time.time()
    kind = task.param("kind", kind=str)
    if kind == "errors":
        print(errors(task))
    elif kind == "nve":
        out, count, mean_t, how, m = md.run(task, nve=True)
        print(f"validate: nve {task.param('steps', kind=int)} steps with {m} models: {how}; mean T {mean_t:.1f} K, {count} frames in {time.time() - t0:.2f} s -> {out}")
    else:
        raise rt.TaskError(f"{task.source}: params.kind: expected 'errors' or 'nve', found {kind!r}")


if __name__ == "__main__":
    try:
        main()
    except (rt.TaskError, rt.XyzError, ValueError) as err:
        rt.fail(str(err))
