"""Independent reference for coherent-only repeated blocks: cirq unitaries and matrix powers.

Nothing here uses the project's engines. A cycle (NoisyLayers) becomes two cirq circuits, the
ideal one and the noisy one (each gate followed by its coherent error unitary), whose unitaries
``cirq.unitary`` gives; N repetitions are numpy matrix powers. Metrics:

- process: 1 - |Tr(U^N† Ũ^N)|²/d² (the process fidelity of a unitary error; Nielsen, Phys. Lett. A
  303, 249 (2002));
- state: 1 - |<ψ|φ>|², ψ = U^N|0…0>, φ = Ũ^N|0…0>;
- observable: <φ|O|φ> - <ψ|O|ψ>.

Also random *echoed* cycles, whose first-order error generator cancels (tests/test_second_order.py).
"""

from __future__ import annotations

import itertools

import cirq
import numpy as np
import scipy.linalg

from budget.circuit.ir import Operation
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat
from reference import _ideal_ops, _noisy_ops, pauli_matrix


def cycle_unitaries(qubits: tuple[str, ...], layers: tuple[NoisyLayer, ...]) -> tuple[np.ndarray, np.ndarray]:
    """(ideal, noisy) unitaries of one cycle, from cirq (qubit 0 most significant)."""
    qs = cirq.LineQubit.range(len(qubits))
    c = NoisyCircuit(qubits, layers)
    pad = [cirq.I(q) for q in qs]  # every qubit in the unitary, even an idle one
    ideal = cirq.Circuit(pad + _ideal_ops(c, qs)).unitary(dtype=np.complex128)
    noisy = cirq.Circuit(pad + _noisy_ops(c, qs)).unitary(dtype=np.complex128)
    return ideal, noisy


def repeated(qubits, layers, count: int) -> tuple[np.ndarray, np.ndarray]:
    u, v = cycle_unitaries(qubits, layers)
    return np.linalg.matrix_power(u, count), np.linalg.matrix_power(v, count)


def infidelity(u: np.ndarray, v: np.ndarray, metric: str) -> float:
    d = u.shape[0]
    if metric == "process":
        return float(1 - abs(np.trace(u.conj().T @ v) / d) ** 2)
    return float(1 - abs(np.vdot(u[:, 0], v[:, 0])) ** 2)


def observable_change(u: np.ndarray, v: np.ndarray, letters: dict[int, str], n: int) -> float:
    label = "".join(letters.get(q, "I") for q in range(n))
    o = pauli_matrix(label)
    return float(np.vdot(v[:, 0], o @ v[:, 0]).real - np.vdot(u[:, 0], o @ u[:, 0]).real)


# -- random echoed cycles ---------------------------------------------------------------------

CLIFFORD_1 = ["h", "s", "sx", "x", "y", "sdg", "sxdg"]
CLIFFORD_2 = ["cz", "cx", "swap"]
_LABELS = {1: ["X", "Y", "Z"], 2: [a + b for a in "IXYZ" for b in "IXYZ"][1:]}


def op(name: str, qubits: tuple[int, ...], h: dict[str, float], params: tuple[float, ...] = (), family: str | None = None) -> NoisyOperation:
    k = len(qubits)
    m = sum((c * pauli_matrix(p) for p, c in h.items()), np.zeros((2**k, 2**k), complex))
    return NoisyOperation(Operation(name, qubits, params), family or name, scipy.linalg.expm(-1j * m), dict(h))


def _random_h(rng, k: int, eps: float) -> dict[str, float]:
    labels = _LABELS[k]
    chosen = rng.choice(len(labels), size=int(rng.integers(1, 3)), replace=False)
    return {labels[i]: float(rng.normal(0, eps)) for i in chosen}


def _pauli_coefficients(h: np.ndarray, k: int) -> dict[str, float]:
    """Hermitian h on k qubits as {label: coefficient} (traceless part), Tr(P h)/2^k."""
    labels = ["".join(p) for p in itertools.product("IXYZ", repeat=k)][1:]
    return {lab: float(np.trace(pauli_matrix(lab) @ h).real / 2**k) for lab in labels}


def cancelled_cycle(rng, n: int, eps: float, *, clifford: bool, layers: int = 3, exact: bool = True) -> tuple[NoisyLayer, ...]:
    """Random layers on n <= 2 qubits with random errors, then one ideal identity (id or rzz(0))
    carrying minus their first-order sum H_1 = Σ R H_op R† (R the ideal rest of the cycle, from
    cirq unitaries), so that the cycle's first-order generator cancels (up to 10 % left over
    when not ``exact``)."""
    body = []
    for _ in range(layers):
        free = list(rng.permutation(n))
        ops = []
        while free:
            if len(free) >= 2 and rng.random() < 0.5:
                qs = (int(free.pop()), int(free.pop()))
                ops.append(op(str(rng.choice(CLIFFORD_2)), qs, _random_h(rng, 2, eps)))
            else:
                qs = (int(free.pop()),)
                pool = CLIFFORD_1 if clifford else CLIFFORD_1 + ["t", "rx", "ry"]
                name = str(rng.choice(pool))
                params = (float(rng.uniform(-np.pi, np.pi)),) if name in ("rx", "ry") else ()
                ops.append(op(name, qs, _random_h(rng, 1, eps), params))
        body.append(NoisyLayer(tuple(ops), (), 0.0))
    qubits = tuple(f"q[{i}]" for i in range(n))
    d = 2**n
    h1 = np.zeros((d, d), complex)
    for k, layer in enumerate(body):
        rest = cycle_unitaries(qubits, tuple(NoisyLayer(tuple(op(o.op.gate, o.op.qubits, {}, o.op.params) for o in lay.operations), (), 0.0) for lay in body[k + 1 :]))[0]
        for nop in layer.operations:
            full = np.zeros((d, d), complex)
            for p, c in nop.hamiltonian.items():
                letters = ["I"] * n
                for pos, q in enumerate(nop.op.qubits):
                    letters[q] = p[pos]
                full += c * pauli_matrix("".join(letters))
            h1 += rest @ full @ rest.conj().T
    f = 1.0 if exact else float(rng.uniform(0.9, 1.1))
    minus = {lab: -f * c for lab, c in _pauli_coefficients(h1, n).items() if abs(c) > 0}
    carrier = op("id", (0,), minus) if n == 1 else op("rzz", (0, 1), minus, (0.0,), family="rzz0")
    body.append(NoisyLayer((carrier,), (), 0.0))
    return tuple(body)


def xy4_cycle(rng, n: int, eps: float) -> tuple[NoisyLayer, ...]:
    """x, y, x, y on every qubit, over-rotations δ_x, δ_y per qubit (h = δ/2 on the gate's axis)."""
    dx = rng.normal(0, eps, n)
    dy = rng.normal(0, eps, n)
    layers = []
    for name, axis, d in (("x", "X", dx), ("y", "Y", dy), ("x", "X", dx), ("y", "Y", dy)):
        layers.append(NoisyLayer(tuple(op(name, (q,), {axis: float(d[q]) / 2}) for q in range(n)), (), 0.0))
    return tuple(layers)


def cpmg_cycle(rng, n: int, eps: float) -> tuple[NoisyLayer, ...]:
    """Free evolution with a Z error, an X pulse, free evolution, an inverted X pulse (rx(-π)),
    pulses over-rotated by ±δ: the first order of both cancels."""
    hz = rng.normal(0, eps, n)
    d = rng.normal(0, eps, n)
    free = NoisyLayer(tuple(op("id", (q,), {"Z": float(hz[q])}) for q in range(n)), (), 0.0)
    x = NoisyLayer(tuple(op("x", (q,), {"X": float(d[q]) / 2}) for q in range(n)), (), 0.0)
    xbar = NoisyLayer(tuple(op("rx", (q,), {"X": -float(d[q]) / 2}, (-np.pi,), family="xbar") for q in range(n)), (), 0.0)
    return (free, x, free, xbar)


def as_circuit(n: int, cycle: tuple[NoisyLayer, ...], count: int) -> NoisyCircuit:
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), (NoisyRepeat(cycle, count),))


# -- random blocks with observables -----------------------------------------------------------

def _random_block(rng, n: int, eps: float, *, clifford: bool) -> tuple[NoisyLayer, ...]:
    layers = []
    for _ in range(int(rng.integers(2, 5))):
        free = list(rng.permutation(n))
        ops = []
        while free:
            if len(free) >= 2 and rng.random() < 0.4:
                qs = (int(free.pop()), int(free.pop()))
                name, params = str(rng.choice(CLIFFORD_2)), ()
            else:
                qs = (int(free.pop()),)
                name = str(rng.choice(CLIFFORD_1 if clifford else CLIFFORD_1 + ["t", "rx", "ry"]))
                params = (float(rng.uniform(-np.pi, np.pi)),) if name in ("rx", "ry") else ()
            labels = ["X", "Y", "Z"] if len(qs) == 1 else ["XX", "ZZ", "XI", "IZ", "YZ"]
            h = {str(lab): float(rng.normal(0, eps)) for lab in rng.choice(labels, size=2, replace=False)}
            ops.append(op(name, qs, h, params))
        layers.append(NoisyLayer(tuple(ops), (), 0.0))
    return tuple(layers)


def observable_cases(total: int):
    """Seeded cases (seed 31): Clifford (even) and non-Clifford (odd) plain random blocks, x/y/x/y
    echoes and cancelled cycles, repeated 1-300 times, each with three random Pauli observables:
    (case, clifford, n, count, cycle, labels, letters)."""
    rng = np.random.default_rng(31)
    for case in range(total):
        clifford = case % 2 == 0
        n = int(rng.integers(1, 4))
        count = int(rng.choice([1, 7, 40, 300]))
        eps = float(rng.uniform(0.2, 1.0) * 0.03 / count)  # summed rotations up to a few 0.01 rad
        kind = case % 4
        if kind == 1:
            cyc = xy4_cycle(rng, n, 10 * eps)
        elif kind == 3 and n <= 2:
            cyc = cancelled_cycle(rng, n, min(0.02, 3 * eps), clifford=clifford)
        else:
            cyc = _random_block(rng, n, eps, clifford=clifford)
        labels, letters = [], []
        for _ in range(3):
            qs = sorted(rng.choice(n, size=int(rng.integers(1, n + 1)), replace=False))
            lt = {int(q): str(rng.choice(["X", "Y", "Z"])) for q in qs}
            letters.append(lt)
            labels.append("".join(f"{p}{q}" for q, p in lt.items()))
        yield case, clifford, n, count, cyc, labels, letters


def third_order_size(cycle: tuple[NoisyLayer, ...], count: int) -> float:
    """(Σ_t ||G_t||)³ over the unrolled circuit: the size of the third-order generator terms."""
    return float((count * sum(np.sqrt(sum(h * h for h in nop.hamiltonian.values())) for lay in cycle for nop in lay.operations)) ** 3)
