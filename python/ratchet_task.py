"""ratchet_task: the ratchet task contract for stage programs written in Python.

One module, standard library only (ASE and numpy are used when present, never required):

- ``Task.load()`` reads the task: ``task.json`` (path from ``$RATCHET_TASK_JSON``, else ``./task.json``)
  and the ``RATCHET_*`` variables (``RATCHET_IN_<NAME>``, ``RATCHET_OUT_<NAME>``,
  ``RATCHET_PARAM_<NAME>``, ``RATCHET_SEED``), which win over task.json when both give a value.
- ``read_frames`` / ``write_frames`` read and write extended XYZ in the units and with the keys ratchet
  reads (positions Å, info ``energy`` eV, per-atom ``forces`` eV/Å, ``velocities`` Å/fs, ``time`` fs,
  ``temperature`` K, committee forces ``forces_0`` ... ``forces_{M-1}``). The writer is this module's own,
  so the file is the same with or without ASE; ``read_atoms`` reads into ``ase.Atoms`` through ASE.
- ``atoms_to_frame`` turns an ``ase.Atoms`` into a Frame, converting ASE's momenta (u·Å per ASE time
  unit) into velocities in Å/fs.

Units: CODATA 2018 (E. Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).
See docs/contract.md for every input, parameter and output of each stage.
"""
from __future__ import annotations

import json
import math
import os
import re
import sys

__all__ = [
    "Task", "TaskError", "Frame", "XyzError", "read_frames", "write_frames", "read_atoms",
    "frame_to_atoms", "atoms_to_frame", "momenta_to_velocities", "set_committee",
    "HARTREE_EV", "BOHR_A", "KB_EV_PER_K", "AMU_KG", "EV_J", "ASE_TIME_UNIT_FS", "have_ase",
]

# ---- units (CODATA 2018) ----
HARTREE_EV = 27.211386245988  # Hartree energy in eV
BOHR_A = 0.529177210903  # Bohr radius in Å
KB_EV_PER_K = 8.617333262e-5  # Boltzmann constant in eV/K
AMU_KG = 1.66053906660e-27  # atomic mass constant in kg
EV_J = 1.602176634e-19  # 1 eV in J (exact)
#: ASE's unit of time, Å·sqrt(u/eV), in fs: 1e-10 m · sqrt(u/eV) / 1e-15 s = 10.1805 fs.
ASE_TIME_UNIT_FS = 1e-10 * math.sqrt(AMU_KG / EV_J) / 1e-15


class TaskError(Exception):
    """A task that cannot be read: the message names the file, variable or key and what was expected."""


class XyzError(Exception):
    """An extended XYZ file that cannot be read or a frame that cannot be written (names file and frame)."""


def have_ase() -> bool:
    """True when ASE can be imported (``RATCHET_TASK_NO_ASE=1`` pretends it cannot)."""
    if os.environ.get("RATCHET_TASK_NO_ASE") == "1":
        return False
    try:
        import ase  # noqa: F401
    except ImportError:
        return False
    return True


def _env_name(name: str) -> str:
    """RATCHET_IN_<NAME> form of a name: every run of characters other than A-Z, 0-9 becomes one '_'."""
    return re.sub(r"[^A-Z0-9]+", "_", name.upper())


def _natural(name: str):
    return [int(p) if p.isdigit() else p for p in re.split(r"(\d+)", name)]


class Task:
    """One ratchet task: inputs (absolute paths), outputs (absolute paths), params, seed.

    Attributes: ``campaign``, ``round``, ``stage``, ``task`` (id such as ``r0/label/0000``), ``seed``,
    ``dir`` (the task directory), ``inputs``, ``outputs``, ``params``, ``input_artifacts``,
    ``output_roles``, ``source`` (the task.json path or ``"environment"``).
    """

    def __init__(self, data: dict, source: str, directory: str):
        self.source = source
        self.dir = directory
        self.campaign = data.get("campaign")
        self.round = data.get("round")
        self.stage = data.get("stage")
        self.task = data.get("task")
        self.seed = data.get("seed")
        self.inputs = dict(data.get("inputs") or {})
        self.params = dict(data.get("params") or {})
        self.outputs = {k: os.path.join(directory, v) for k, v in (data.get("outputs") or {}).items()}
        self.input_artifacts = dict(data.get("input_artifacts") or {})
        self.output_roles = dict(data.get("output_roles") or {})

    @classmethod
    def load(cls, path: str | None = None, environ=None) -> "Task":
        """Read the task: task.json from ``path``, ``$RATCHET_TASK_JSON`` or ``./task.json`` (whichever
        comes first), then the RATCHET_* variables on top. Without any task.json the variables alone
        make the task (inputs, outputs and params are then those the variables name)."""
        env = os.environ if environ is None else environ
        path = path or env.get("RATCHET_TASK_JSON") or ("task.json" if os.path.exists("task.json") else None)
        data: dict = {}
        source = "environment"
        if path:
            try:
                with open(path, encoding="utf-8") as fh:
                    data = json.load(fh)
            except FileNotFoundError:
                raise TaskError(f"{path}: no such file (expected the task's task.json; set RATCHET_TASK_JSON or run in the task directory)") from None
            except json.JSONDecodeError as err:
                raise TaskError(f"{path}: line {err.lineno}: not valid JSON: {err.msg}") from None
            if not isinstance(data, dict):
                raise TaskError(f"{path}: expected a JSON object, found {type(data).__name__}")
            for key, kind in (("inputs", dict), ("outputs", dict), ("params", dict)):
                if key in data and not isinstance(data[key], kind):
                    raise TaskError(f"{path}: key '{key}' must be an object of name -> value, found {type(data[key]).__name__}")
            source = path
        directory = env.get("RATCHET_TASK_DIR") or (os.path.dirname(os.path.abspath(path)) if path else os.getcwd())
        task = cls(data, source, directory)
        # The variables win: they are what the batch script exported for this attempt.
        known = {_env_name(n): n for n in list(task.inputs) + list(task.outputs) + list(task.params)}
        for var, value in env.items():
            for prefix, table in (("RATCHET_IN_", task.inputs), ("RATCHET_OUT_", task.outputs)):
                if var.startswith(prefix):
                    table[known.get(var[len(prefix):], var[len(prefix):].lower())] = value
            if var.startswith("RATCHET_PARAM_"):
                name = known.get(var[len("RATCHET_PARAM_"):], var[len("RATCHET_PARAM_"):].lower())
                if name not in task.params or not isinstance(task.params[name], (dict, list)):
                    task.params[name] = _scalar(value) if not isinstance(task.params.get(name), str) else value
        if "RATCHET_SEED" in env:
            try:
                task.seed = int(env["RATCHET_SEED"])
            except ValueError:
                raise TaskError(f"RATCHET_SEED: expected a whole number, found {env['RATCHET_SEED']!r}") from None
        for var, attr in (("RATCHET_TASK", "task"), ("RATCHET_STAGE", "stage"), ("RATCHET_CAMPAIGN", "campaign")):
            if env.get(var) and getattr(task, attr) is None:
                setattr(task, attr, env[var])
        if env.get("RATCHET_ROUND") and task.round is None:
            task.round = int(env["RATCHET_ROUND"])
        return task

    def _where(self, key: str) -> str:
        return f"{self.source}: {key}"

    def input(self, name: str) -> str:
        """The absolute path of input ``name``."""
        if name not in self.inputs:
            have = ", ".join(sorted(self.inputs)) or "none"
            raise TaskError(f"{self._where('inputs.' + name)}: missing input (set RATCHET_IN_{_env_name(name)}; inputs given: {have})")
        return self.inputs[name]

    def output(self, name: str) -> str:
        """The absolute path to write output ``name`` to (its folder is created)."""
        if name not in self.outputs:
            have = ", ".join(sorted(self.outputs)) or "none"
            raise TaskError(f"{self._where('outputs.' + name)}: missing output (set RATCHET_OUT_{_env_name(name)}; outputs expected: {have})")
        path = self.outputs[name]
        os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
        return path

    def param(self, name: str, default=None, kind=None):
        """Parameter ``name`` (``default`` when absent; required when default is None and kind is given).
        ``kind`` is ``float``, ``int``, ``bool`` or ``str``: the value is checked against it."""
        if name not in self.params or self.params[name] is None:
            if default is None and kind is not None:
                raise TaskError(f"{self._where('params.' + name)}: missing parameter (expected {kind.__name__}; set RATCHET_PARAM_{_env_name(name)})")
            return default
        v = self.params[name]
        if kind is float:
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise TaskError(f"{self._where('params.' + name)}: expected a finite number, found {v!r}")
            return float(v)
        if kind is int:
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v != int(v):
                raise TaskError(f"{self._where('params.' + name)}: expected a whole number, found {v!r}")
            return int(v)
        if kind is bool:
            if not isinstance(v, bool):
                raise TaskError(f"{self._where('params.' + name)}: expected true or false, found {v!r}")
        if kind is str and not isinstance(v, str):
            raise TaskError(f"{self._where('params.' + name)}: expected a string, found {v!r}")
        return v

    def models(self) -> list[str]:
        """The committee's model files: inputs model_0, model_1, ... in natural order."""
        names = sorted((n for n in self.inputs if re.fullmatch(r"model_\d+", n)), key=_natural)
        return [self.inputs[n] for n in names]


def _scalar(text: str):
    if text in ("true", "false"):
        return text == "true"
    try:
        return int(text)
    except ValueError:
        pass
    try:
        return float(text)
    except ValueError:
        return text


# ---- extended XYZ ----

class Frame:
    """One configuration: ``symbols`` (list of str), ``positions`` (list of [x, y, z] in Å), ``cell``
    (3 rows of 3 numbers in Å, or None), ``pbc`` (3 bools), ``info`` (dict of the comment line's
    values) and ``arrays`` (name -> list of per-atom values: a list of numbers for width > 1, a number,
    string or bool for width 1)."""

    def __init__(self, symbols, positions, cell=None, pbc=(False, False, False), info=None, arrays=None):
        self.symbols = list(symbols)
        self.positions = [[float(c) for c in p] for p in positions]
        self.cell = None if cell is None else [[float(c) for c in row] for row in cell]
        self.pbc = [bool(b) for b in pbc]
        self.info = dict(info or {})
        self.arrays = dict(arrays or {})

    def __len__(self):
        return len(self.symbols)

    def __repr__(self):
        return f"Frame({len(self)} atoms, info keys {list(self.info)}, arrays {list(self.arrays)})"


def set_committee(frame: Frame, forces_per_model, energies=None, drive=None) -> Frame:
    """Put a committee's predictions on ``frame``: per-atom ``forces_0`` ... ``forces_{M-1}`` (eV/Å),
    info ``energy_<m>`` (eV) when ``energies`` are given, and, unless ``drive`` says otherwise, ``forces``
    and ``energy`` as the committee mean (``drive`` = a model index uses that member's values)."""
    forces_per_model = [[[float(c) for c in row] for row in f] for f in forces_per_model]
    m = len(forces_per_model)
    if m == 0:
        raise ValueError("set_committee: expected the forces of at least one model")
    n = len(frame)
    for k, f in enumerate(forces_per_model):
        if len(f) != n or any(len(r) != 3 for r in f):
            raise ValueError(f"set_committee: model {k}: expected {n} x 3 forces, found {len(f)} rows")
        frame.arrays[f"forces_{k}"] = f
    if drive is None:
        frame.arrays["forces"] = [[sum(f[i][c] for f in forces_per_model) / m for c in range(3)] for i in range(n)]
    else:
        frame.arrays["forces"] = [list(r) for r in forces_per_model[drive]]
    if energies is not None:
        energies = [float(e) for e in energies]
        if len(energies) != m:
            raise ValueError(f"set_committee: expected {m} energies, found {len(energies)}")
        for k, e in enumerate(energies):
            frame.info[f"energy_{k}"] = e
        frame.info["energy"] = sum(energies) / m if drive is None else energies[drive]
    return frame


_KV = re.compile(r'\s*([^\s=]+)\s*=\s*("(?:[^"\\]|\\.)*"|\[[^\]]*\]|\{[^}]*\}|\S+)')


def _unquote(s: str) -> str:
    if len(s) >= 2 and s[0] == '"' and s[-1] == '"':
        return re.sub(r"\\(.)", lambda m: "\n" if m.group(1) == "n" else m.group(1), s[1:-1])
    return s


def _value(raw: str):
    quoted = raw.startswith('"')
    s = _unquote(raw)
    if raw.startswith("["):
        inner = s[1:-1].strip()
        if not inner:
            return []
        return [_value(p.strip()) for p in inner.split(",")]
    if not quoted:
        if s in ("T", "True", "true"):
            return True
        if s in ("F", "False", "false"):
            return False
    parts = s.split()
    if len(parts) > 1:
        vals = [_number(p) for p in parts]
        if all(v is not None for v in vals):
            return vals
        if all(p in ("T", "F") for p in parts):
            return [p == "T" for p in parts]
        return s
    v = _number(s)
    return s if v is None else v


def _number(s: str):
    try:
        return int(s)
    except ValueError:
        pass
    try:
        return float(s)
    except ValueError:
        return None


def _parse_comment(line: str, where: str):
    info = {}
    pos = 0
    line = line.strip()
    while pos < len(line):
        m = _KV.match(line, pos)
        if not m:
            rest = line[pos:].strip()
            if not rest:
                break
            raise XyzError(f"{where}: comment line: expected key=value, found {rest[:40]!r}")
        info[_unquote(m.group(1))] = (m.group(2))
        pos = m.end()
    return info


def read_frames(path: str, as_atoms: bool = False):
    """Every frame of an extended XYZ file, as Frames (or as ``ase.Atoms`` through ASE with ``as_atoms``)."""
    if as_atoms:
        return read_atoms(path)
    frames = []
    try:
        fh = open(path, encoding="utf-8")
    except FileNotFoundError:
        raise XyzError(f"{path}: no such file") from None
    with fh:
        lines = fh.read().split("\n")
    i = 0
    while i < len(lines):
        if not lines[i].strip():
            i += 1
            continue
        where = f"{path}: line {i + 1} (frame {len(frames)})"
        try:
            n = int(lines[i].strip())
        except ValueError:
            raise XyzError(f"{where}: expected the atom count, found {lines[i][:40]!r}") from None
        if i + 1 + n >= len(lines) + (0 if lines[-1] == "" else 1):
            raise XyzError(f"{where}: the file ends before the frame's {n} atom lines")
        raw = _parse_comment(lines[i + 1], f"{path}: line {i + 2}")
        props = _unquote(raw.pop("Properties", raw.pop("properties", '"species:S:1:pos:R:3"')))
        lattice = raw.pop("Lattice", raw.pop("lattice", None))
        pbc_raw = raw.pop("pbc", None)
        cols = props.split(":")
        if len(cols) % 3:
            raise XyzError(f"{path}: line {i + 2}: Properties must be name:type:width triples, found {props!r}")
        spec = [(cols[k], cols[k + 1], int(cols[k + 2])) for k in range(0, len(cols), 3)]
        symbols, positions, arrays = [], [], {name: [] for name, _, _ in spec if name not in ("species", "pos")}
        for a in range(n):
            ln = i + 2 + a
            fields = lines[ln].split()
            need = sum(w for _, _, w in spec)
            if len(fields) != need:
                raise XyzError(f"{path}: line {ln + 1}: expected {need} columns ({props}), found {len(fields)}")
            k = 0
            for name, typ, w in spec:
                vals = fields[k:k + w]
                k += w
                conv = {"R": float, "I": int, "S": str, "L": lambda t: t in ("T", "True", "true", "1")}[typ]
                try:
                    vals = [conv(v) for v in vals]
                except ValueError:
                    raise XyzError(f"{path}: line {ln + 1}: column '{name}' expected type {typ}, found {' '.join(vals)!r}") from None
                if name == "species":
                    symbols.append(vals[0])
                elif name == "pos":
                    positions.append(vals)
                else:
                    arrays[name].append(vals if w > 1 else vals[0])
        info = {k: _value(v) for k, v in raw.items()}
        cell = None
        if lattice is not None:
            nums = [float(x) for x in _unquote(lattice).split()]
            if len(nums) != 9:
                raise XyzError(f"{path}: line {i + 2}: Lattice must hold 9 numbers, found {len(nums)}")
            cell = [nums[0:3], nums[3:6], nums[6:9]]
        if pbc_raw is not None:
            pbc = [t in ("T", "True", "true") for t in _unquote(pbc_raw).split()]
        else:
            pbc = [cell is not None] * 3
        frames.append(Frame(symbols, positions, cell, pbc, info, arrays))
        i += 2 + n
    return frames


def _num(x) -> str:
    if isinstance(x, bool):
        return "T" if x else "F"
    if isinstance(x, int):
        return str(x)
    x = float(x)
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(x)


_BARE = re.compile(r'^[^\s=",{}\[\]\\\']+$')


def _info_text(key, v, where):
    if isinstance(v, bool):
        return "T" if v else "F"
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return _num(v)
    if isinstance(v, str):
        if _BARE.match(v):
            return v
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n") + '"'
    if hasattr(v, "tolist"):
        v = v.tolist()
    if isinstance(v, (list, tuple)):
        if all(isinstance(x, (int, float)) for x in v):
            parts = [_num(x) for x in v]
            return f'"{" ".join(parts)}"' if len(parts) >= 2 else f"[{''.join(parts)}]"
        if all(isinstance(x, str) for x in v):
            return "[" + ", ".join('"' + x.replace('"', '\\"') + '"' for x in v) + "]"
    raise XyzError(f"{where}: info '{key}' must be a number, logical, string or a list of them, found {type(v).__name__}")


def _column(name, values, n, where):
    if hasattr(values, "tolist"):
        values = values.tolist()
    values = list(values)
    if len(values) != n:
        raise XyzError(f"{where}: array '{name}' holds {len(values)} rows, expected one per atom ({n})")
    first = values[0] if n else 0.0
    width = len(first) if isinstance(first, (list, tuple)) else 1
    rows = [list(v) if isinstance(v, (list, tuple)) else [v] for v in values]
    if any(len(r) != width for r in rows):
        raise XyzError(f"{where}: array '{name}': every row must hold {width} values")
    sample = rows[0][0] if n else 0.0
    typ = "L" if isinstance(sample, bool) else "S" if isinstance(sample, str) else "I" if isinstance(sample, int) else "R"
    if typ == "R":
        rows = [[float(x) for x in r] for r in rows]
    return typ, width, rows


def _format(frame: Frame, where: str) -> str:
    n = len(frame.symbols)
    if len(frame.positions) != n:
        raise XyzError(f"{where}: {len(frame.positions)} positions for {n} atoms")
    parts = []
    if frame.cell is not None:
        parts.append('Lattice="' + " ".join(_num(x) for row in frame.cell for x in row) + '"')
    cols = []
    props = ["species:S:1:pos:R:3"]
    for name, values in frame.arrays.items():
        if name in ("species", "pos", "positions", "numbers"):
            continue
        typ, width, rows = _column(name, values, n, where)
        props.append(f"{name}:{typ}:{width}")
        cols.append(rows)
    parts.append("Properties=" + ":".join(props))
    for key, v in frame.info.items():
        if key.lower() in ("lattice", "properties", "pbc"):
            raise XyzError(f"{where}: info key '{key}' clashes with the extended XYZ key of that name")
        parts.append(f"{key}={_info_text(key, v, where)}")
    parts.append('pbc="' + " ".join("T" if b else "F" for b in frame.pbc) + '"')
    out = [str(n), " ".join(parts)]
    for a in range(n):
        fields = [frame.symbols[a]] + [_num(x) for x in frame.positions[a]]
        for rows in cols:
            fields += [_num(x) if not isinstance(x, str) else x for x in rows[a]]
        out.append(" ".join(fields))
    return "\n".join(out) + "\n"


def write_frames(path: str, frames) -> None:
    """Write Frames (or ``ase.Atoms``, converted by ``atoms_to_frame``) as extended XYZ. The file is
    written under a temporary name and renamed into place, so a reader never sees half of it."""
    text = []
    for k, f in enumerate(frames):
        if not isinstance(f, Frame):
            f = atoms_to_frame(f)
        text.append(_format(f, f"{path}: frame {k}"))
    os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
    tmp = f"{path}.{os.getpid()}.tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write("".join(text))
    os.replace(tmp, path)


# ---- ASE ----

def momenta_to_velocities(momenta, masses):
    """Velocities in Å/fs from ASE momenta (u·Å per ASE time unit) and masses (u)."""
    return [[p / m / ASE_TIME_UNIT_FS for p in row] for row, m in zip(momenta, masses)]


def read_atoms(path: str):
    """Every frame as ``ase.Atoms`` through ASE's extxyz reader (ASE puts ``energy`` and ``forces`` on a
    SinglePointCalculator: use ``atoms.get_potential_energy()`` / ``atoms.get_forces()``)."""
    if not have_ase():
        raise XyzError(f"{path}: read_atoms needs ASE (python3-ase); use read_frames without it")
    import ase.io
    return ase.io.read(path, index=":", format="extxyz")


def frame_to_atoms(frame: Frame):
    """An ``ase.Atoms`` of a Frame: info and per-atom arrays copied, ``velocities`` (Å/fs) turned into
    ASE momenta, ``energy``/``forces`` put on a SinglePointCalculator (as ASE's own reader does)."""
    import numpy as np
    from ase import Atoms
    from ase.calculators.singlepoint import SinglePointCalculator
    atoms = Atoms(symbols=frame.symbols, positions=frame.positions, cell=frame.cell if frame.cell is not None else np.zeros((3, 3)), pbc=frame.pbc)
    info = dict(frame.info)
    energy = info.pop("energy", None)
    atoms.info.update(info)
    forces = None
    for name, values in frame.arrays.items():
        if name == "forces":
            forces = np.asarray(values, dtype=float)
        elif name == "velocities":
            v = np.asarray(values, dtype=float)
            atoms.set_momenta(v * atoms.get_masses()[:, None] * ASE_TIME_UNIT_FS)
        else:
            atoms.arrays[name] = np.asarray(values)
    if energy is not None or forces is not None:
        atoms.calc = SinglePointCalculator(atoms, energy=energy, forces=forces)
    return atoms


def atoms_to_frame(atoms, energy=None, forces=None, velocities: bool = True) -> Frame:
    """A Frame of an ``ase.Atoms``: symbols, positions, cell (when periodic or set), pbc, info and
    per-atom arrays; ``energy`` (eV) and ``forces`` (eV/Å) from the arguments, else from a
    SinglePointCalculator's results; ASE's momenta become ``velocities`` in Å/fs (``velocities=False``
    drops them)."""
    cell = atoms.get_cell()
    has_cell = bool(abs(cell.array).sum() > 0) if hasattr(cell, "array") else any(any(r) for r in cell)
    info = {k: v for k, v in atoms.info.items() if isinstance(v, (bool, int, float, str, list, tuple)) or hasattr(v, "tolist")}
    arrays = {}
    masses = atoms.get_masses()
    for name, values in atoms.arrays.items():
        if name in ("numbers", "positions"):
            continue
        if name == "momenta":
            if velocities:
                arrays["velocities"] = momenta_to_velocities(values.tolist(), masses.tolist())
            continue
        arrays[name] = values.tolist()
    calc = getattr(atoms, "calc", None)
    results = getattr(calc, "results", {}) if calc is not None else {}
    if energy is None and "energy" in results:
        energy = results["energy"]
    if forces is None and "forces" in results:
        forces = results["forces"]
    if energy is not None:
        info["energy"] = float(energy)
    if forces is not None:
        arrays["forces"] = [[float(c) for c in row] for row in (forces.tolist() if hasattr(forces, "tolist") else forces)]
    return Frame(atoms.get_chemical_symbols(), atoms.get_positions().tolist(), cell.array.tolist() if has_cell else None,
                 [bool(b) for b in atoms.get_pbc()], info, arrays)


def fail(message: str, code: int = 2) -> None:
    """Print ``<program>: error: message`` on stderr and exit with ``code`` (2: bad input)."""
    sys.stderr.write(f"{os.path.basename(sys.argv[0])}: error: {message}\n")
    sys.exit(code)
