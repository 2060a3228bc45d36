"""The one Pauli algebra module and object-keyed caches against what they replaced, side by side.

    .venv/bin/python benchmarks/bench_algebra.py

Three pairs, each timed in this process on the same inputs, ratio new / old printed:

1. Clifford test of a gate matrix: stim's ``Tableau.from_unitary_matrix`` plus the project's
   coefficient check (budget/circuit/clifford_check.py) against the former pure-numpy check that
   decomposed U G U† and U† G U for every generator (reproduced below as the competitor).
2. Pauli twirl of a coherent error: one batched expansion (budget/pauli_algebra.py) against the
   former loop of 4^k traces Tr(P U) (reproduced below).
3. Cache lookups: ``dict[ObjectKey(obj)]`` (budget/memo.py) against ``dict[id(obj)]``.

Both sides of each pair must agree (checked before timing).
"""

from __future__ import annotations

import itertools
import time

import numpy as np

from budget.circuit.clifford_check import local_clifford
from budget.circuit.gates import GATES, ideal_unitary
from budget.memo import ObjectKey
from budget.pauli_algebra import pauli_decompose, pauli_labels, pauli_matrix, twirl_probabilities

# ---- the former implementations (competitors) --------------------------------------------------


def _old_as_pauli(m, tol):
    k = int(round(np.log2(m.shape[0])))
    coeffs = np.array(list(pauli_decompose(m).values()))
    best = int(np.argmax(np.abs(coeffs)))
    rest = np.delete(coeffs, best)
    c = coeffs[best]
    if rest.size and np.max(np.abs(rest)) > tol or abs(abs(c) - 1) > 2 * tol or abs(c.imag) > 2 * tol:
        return None
    label = pauli_labels(k)[best]
    x = tuple(int(ch in "XY") for ch in label)
    z = tuple(int(ch in "YZ") for ch in label)
    return x, z, (label.count("Y") + (2 if c.real < 0 else 0)) % 4


def _old_local_clifford(u, tol=1e-9):
    k = int(round(np.log2(u.shape[0])))
    gens = [pauli_matrix("".join(c if i == j else "I" for i in range(k))) for c in "XZ" for j in range(k)]
    fwd, bwd = [], []
    for g in gens:
        a, b = _old_as_pauli(u @ g @ u.conj().T, tol), _old_as_pauli(u.conj().T @ g @ u, tol)
        if a is None or b is None:
            return None
        fwd.append(a)
        bwd.append(b)
    return tuple(fwd), tuple(bwd)


def _old_twirl(u):
    d = u.shape[0]
    k = int(round(np.log2(d)))
    out = {}
    for letters in list(itertools.product("IXYZ", repeat=k))[1:]:
        label = "".join(letters)
        p = abs(np.trace(pauli_matrix(label) @ u) / d) ** 2
        if p > 1e-300:
            out[label] = float(p)
    return out


def _best(fn, repeats: int = 5) -> float:
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    rng = np.random.default_rng(7)
    mats = []
    for name, s in sorted(GATES.items()):
        for angles in ((np.pi / 2, 0.0, np.pi), (0.3, 0.2, 0.1)):
            mats.append(ideal_unitary(name, angles[: s.num_params]))
    for m in mats:  # both sides agree on every table gate, Clifford or not
        new, old = local_clifford(m), _old_local_clifford(m)
        assert (new is None) == (old is None) and (new is None or (new.forward, new.backward) == old)
    t_new = _best(lambda: [local_clifford(m) for m in mats])
    t_old = _best(lambda: [_old_local_clifford(m) for m in mats])
    print(f"1. Clifford test of {len(mats)} gate matrices: new {t_new * 1e3:.1f} ms, old {t_old * 1e3:.1f} ms, "
          f"new/old {t_new / t_old:.2f}")

    errors = []
    for k in (1, 2):
        for _ in range(50):
            h = rng.normal(0, 0.02, 4**k - 1)
            w, v = np.linalg.eigh(sum(c * pauli_matrix(lab) for c, lab in zip(h, pauli_labels(k)[1:])))
            errors.append((v * np.exp(-1j * w)) @ v.conj().T)
    for u in errors:
        a, b = twirl_probabilities(u), _old_twirl(u)
        assert a.keys() == b.keys() and all(abs(a[x] - b[x]) < 1e-15 for x in a)
    t_new = _best(lambda: [twirl_probabilities(u) for u in errors])
    t_old = _best(lambda: [_old_twirl(u) for u in errors])
    print(f"2. Pauli twirl of {len(errors)} coherent errors: new {t_new * 1e3:.1f} ms, old {t_old * 1e3:.1f} ms, "
          f"new/old {t_new / t_old:.2f}")

    objs = [object() for _ in range(1000)]
    by_key = {ObjectKey(o): i for i, o in enumerate(objs)}
    by_id = {id(o): i for i, o in enumerate(objs)}
    t_new = _best(lambda: [by_key[ObjectKey(o)] for _ in range(100) for o in objs])
    t_old = _best(lambda: [by_id[id(o)] for _ in range(100) for o in objs])
    print(f"3. 100000 cache lookups: ObjectKey {t_new * 1e3:.1f} ms, id() {t_old * 1e3:.1f} ms, "
          f"new/old {t_new / t_old:.2f} ({(t_new - t_old) / 1e5 * 1e9:.0f} ns more per lookup)")


if __name__ == "__main__":
    main()
