"""The committee member of the water-xtb example: a small machine-learned potential of our own design.

For a molecule or cluster whose atoms keep their identity (no exchange, no bond breaking), the energy
is a polynomial in the inverse interatomic distances q_ab = 1 Å / r_ab of all P = N(N-1)/2
pairs, in the fixed atom order of the training frames:

    E = c + sum_a w_a q_a + sum_{a<=b} W_ab q_a q_b + ...   (every monomial of the q up to `degree`)

That is linear in its weights (35 for water, P = 3, at degree 4), so a member is fitted
by ridge regression on energies and forces together (forces are -dE/dx, exact for every weight).
Members differ by a bootstrap resample of the frames and by a random anchor the weights are pulled
towards (a "randomized prior", Osband et al., NeurIPS 2018). With 35 weights and hundreds of force
components per round the data fix every weight, so the anchor hardly matters and the members agree
closely: the committee's spread understates its error (README.md, "The committee is overconfident").
With many atoms the distances are redundant (a water dimer: 15 distances, 12 internal coordinates)
and the polynomial extrapolated wildly in MD (measured: it blew up within 20 fs): this model is for
one small molecule.

numpy only. The model file is JSON (format "ratchet-water-xtb-model").
"""
from __future__ import annotations

import json

import numpy as np

FORMAT = "ratchet-water-xtb-model"


def pairs(n: int):
    """Atom pairs (a, b), a < b, in a fixed order."""
    return [(a, b) for a in range(n) for b in range(a + 1, n)]


def inverse_distances(positions: np.ndarray):
    """q (P,) = 1/r of every pair (Å^-1) and its Jacobian dq/dx (P, 3N)."""
    n = len(positions)
    idx = np.array(pairs(n))
    d = positions[idx[:, 1]] - positions[idx[:, 0]]
    r = np.linalg.norm(d, axis=1)
    q = 1.0 / r
    # dq/dx_b = -d / r^3, dq/dx_a = +d / r^3
    g = -d / r[:, None] ** 3
    jac = np.zeros((len(idx), 3 * n))
    rows = np.arange(len(idx))
    for c in range(3):
        jac[rows, 3 * idx[:, 1] + c] = g[:, c]
        jac[rows, 3 * idx[:, 0] + c] = -g[:, c]
    return q, jac


def monomials(p: int, degree: int):
    """Index tuples (a <= b <= ...) of every monomial of q of degree 1 ... `degree`."""
    out = []

    def grow(prefix, start, left):
        if prefix:
            out.append(tuple(prefix))
        if left == 0:
            return
        for a in range(start, p):
            grow(prefix + [a], a, left - 1)

    grow([], 0, degree)
    return sorted(out, key=lambda t: (len(t), t))


def features(positions: np.ndarray, degree: int = 2):
    """Energy features phi (K,) and their gradient dphi/dx (K, 3N): 1 and every monomial of q up to `degree`."""
    q, jac = inverse_distances(positions)
    terms = monomials(len(q), degree)
    phi = np.empty(1 + len(terms))
    dphi = np.zeros((1 + len(terms), jac.shape[1]))
    phi[0] = 1.0
    for k, t in enumerate(terms, start=1):
        phi[k] = np.prod(q[list(t)])
        for j in range(len(t)):
            rest = t[:j] + t[j + 1:]
            dphi[k] += (np.prod(q[list(rest)]) if rest else 1.0) * jac[t[j]]
    return phi, dphi


def fit(frames, member: int, seed: int, bootstrap: bool, sigma_e: float = 0.001, sigma_f: float = 0.02,
        lam: float = 1e-6, prior: float = 0.5, degree: int = 4):
    """Fit one member to frames [(symbols, positions (N,3), energy eV, forces (N,3) eV/Å)].

    Loss: sum_f m_f [((E_pred - E)/N)^2 / sigma_e^2 + |F_pred - F|^2 / sigma_f^2] + lam |w - w0|^2 over
    the non-constant weights, with m_f the bootstrap multiplicity and w0 ~ N(0, prior^2) drawn from the seed.
    """
    rng = np.random.default_rng(seed)
    symbols = frames[0][0]
    n = len(symbols)
    for k, (s, *_rest) in enumerate(frames):
        if list(s) != list(symbols):
            raise ValueError(f"frame {k}: atoms {''.join(s)} differ from the first frame's {''.join(symbols)}: this model needs one fixed atom order")
    mult = np.bincount(rng.integers(0, len(frames), len(frames)), minlength=len(frames)) if bootstrap else np.ones(len(frames), int)
    e0 = float(np.mean([f[2] for f in frames]))
    rows, targets, weights = [], [], []
    for m, (_s, pos, energy, forces) in zip(mult, frames):
        if m == 0:
            continue
        phi, dphi = features(np.asarray(pos), degree)
        rows.append(phi / n)
        targets.append((energy - e0) / n)
        weights.append(m / sigma_e**2)
        rows.extend(-dphi.T)
        targets.extend(np.asarray(forces).ravel())
        weights.extend([m / sigma_f**2] * (3 * n))
    a = np.asarray(rows)
    y = np.asarray(targets)
    w = np.asarray(weights)
    k = a.shape[1]
    w0 = rng.normal(0.0, prior, k)
    w0[0] = 0.0
    reg = np.full(k, lam)
    reg[0] = 0.0
    lhs = a.T @ (a * w[:, None]) + np.diag(reg)
    rhs = a.T @ (w * y) + reg * w0
    coef = np.linalg.solve(lhs, rhs)
    coef[0] += e0
    model = {"format": FORMAT, "species": list(symbols), "degree": degree, "weights": coef.tolist(), "member": member, "seed": seed,
             "bootstrap": bool(bootstrap), "frames": len(frames), "distinct_frames": int((mult > 0).sum()),
             "hyper": {"sigma_e": sigma_e, "sigma_f": sigma_f, "lambda": lam, "prior": prior}}
    e_err, f_err = [], []
    for _s, pos, energy, forces in frames:
        e, f = predict(model, np.asarray(pos))
        e_err.append((e - energy) / n)
        f_err.append((f - np.asarray(forces)).ravel())
    model["train_rmse"] = {"energy_meV_per_atom": 1000 * float(np.sqrt(np.mean(np.square(e_err)))),
                           "force_meV_per_A": 1000 * float(np.sqrt(np.mean(np.square(np.concatenate(f_err)))))}
    return model


def predict(model, positions: np.ndarray):
    """Energy (eV) and forces (N, 3) in eV/Å of one member at positions (N, 3) in Å."""
    phi, dphi = features(positions, model.get("degree", 2))
    w = np.asarray(model["weights"])
    return float(phi @ w), -(w @ dphi).reshape(-1, 3)


def load(path: str):
    with open(path, encoding="utf-8") as fh:
        model = json.load(fh)
    if model.get("format") != FORMAT:
        raise ValueError(f"{path}: expected a model file with format {FORMAT!r}, found {model.get('format')!r}")
    return model


def check_atoms(model, symbols, where: str):
    if list(symbols) != model["species"]:
        raise ValueError(f"{where}: atoms {' '.join(symbols)} differ from the model's {' '.join(model['species'])} (this model needs the training frames' atom order)")


def make_calculator(models):
    """An ase Calculator driven by the committee mean, remembering each member's energy and forces."""
    from ase.calculators.calculator import Calculator, all_changes

    class CommitteeCalculator(Calculator):
        implemented_properties = ["energy", "forces"]

        def __init__(self):
            super().__init__()
            self.members = None

        def calculate(self, atoms=None, properties=("energy",), system_changes=all_changes):
            super().calculate(atoms, properties, system_changes)
            res = [predict(m, self.atoms.get_positions()) for m in models]
            energies = np.array([e for e, _ in res])
            forces = np.array([f for _, f in res])
            self.members = (energies, forces)
            self.results = {"energy": float(energies.mean()), "forces": forces.mean(axis=0)}

    return CommitteeCalculator()
