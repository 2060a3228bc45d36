"""Which coherent errors build up over repetitions of a cycle and which are echoed away.

Each coherent knob (family, knob) of one cycle gives a Hamiltonian error H_k pushed to the end of
the cycle (first order, Blume-Kohout et al., "A taxonomy of small Markovian errors", PRX Quantum 3,
020335 (2022)). Over N cycles it sums to S_N(H_k) = Σ_{j<N} U_c^j H_k U_c^{-j} (design.md §4,
:mod:`budget.engines.periodic`): the part of H_k that commutes with the cycle grows as N ("builds
up", ``growing_rad`` per cycle), the rest stays bounded by ``bounded_rad`` ("echoed away"). Both
are in radians, normalised like a Pauli amplitude, so that knob alone costs
(N · growing)² + b(N)², 0 <= b(N) <= bounded, of process infidelity to first order.

The cycle is propagated densely (2^n x 2^n matrices, at most :data:`MAX_QUBITS` qubits); inner
repeats use the periodic closed form, so they are not unrolled.
"""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np

from budget.errors.fidelity import pauli_matrix
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation

MAX_QUBITS = 10
_REL_TOL = 1e-9  # relative to the knob's own size per cycle: below this a part counts as absent


@dataclass(frozen=True)
class Component:
    """One coherent knob's behaviour under repetition.

    Attributes:
        name: ``"family.knob"`` (e.g. ``"cz.cphase"``).
        growing_rad: the part that commutes with the cycle, added every cycle.
        bounded_rad: the largest size the rest ever reaches.
    """

    name: str
    growing_rad: float
    bounded_rad: float
    local_rad: float = 1.0

    @property
    def builds_up(self) -> bool:
        return self.growing_rad > _REL_TOL * self.local_rad

    @property
    def behaviour(self) -> str:
        """Plain words: builds up, echoed away, or cancels within each cycle."""
        if self.builds_up:
            onset = self.bounded_rad / self.growing_rad
            return f"builds up, dominant beyond N ≈ {onset:.3g}" if onset > 2 else "builds up (∝ N)"
        if self.bounded_rad > _REL_TOL * self.local_rad:
            return "echoed away (stays bounded)"
        return "cancels within each cycle (to first order)"

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "growing_rad": self.growing_rad,
            "bounded_rad": self.bounded_rad,
            "local_rad": self.local_rad,
            "builds_up": self.builds_up,
            "behaviour": self.behaviour,
        }


@dataclass(frozen=True)
class CycleErrors:
    """A cycle's ideal unitary and each knob's first-order Hamiltonian pushed to the cycle's end.

    Attributes:
        unitary: U_c (d x d).
        names: ``"family.knob"`` per Hamiltonian.
        hamiltonians: shape (K, d, d), H_k in radians (value times propagated unit generator).
        local_rad: per name, Σ over the cycle's operations of the knob's own amplitude
            |value| · sqrt(Σ_P g_P²) before propagation (the scale of "nothing left").
    """

    unitary: np.ndarray
    names: tuple[str, ...]
    hamiltonians: np.ndarray
    local_rad: tuple[float, ...] = ()

    def components(self) -> tuple[Component, ...]:
        """Every knob's split, the largest long-run contributors first."""
        from budget.engines.periodic import accumulation_split, cycle_basis

        basis = cycle_basis(self.unitary)
        out = [
            Component(name, *accumulation_split(basis, h), local)
            for name, h, local in zip(self.names, self.hamiltonians, self.local_rad)
            if local > 0
        ]
        return tuple(sorted(out, key=lambda c: (-c.growing_rad, -c.bounded_rad, c.name)))


def _embed(local: np.ndarray, qubits: tuple[int, ...], n: int) -> np.ndarray:
    """A k-qubit matrix (gate order) on ``qubits`` of n, as a 2^n x 2^n matrix (qubit 0 most significant)."""
    k = len(qubits)
    rest = [q for q in range(n) if q not in qubits]
    full = np.kron(local, np.eye(2 ** (n - k))).reshape((2,) * (2 * n))
    order = np.argsort(list(qubits) + rest)
    return full.transpose(list(order) + [n + i for i in order]).reshape(2**n, 2**n)


def _op_terms(nop: NoisyOperation, by_knob: bool) -> list[tuple[str, dict[str, float], float]]:
    """(group name, Pauli generator, scale): knob generators times knob values, or the exact
    Hamiltonian when not split by knob (or when the operation has no knob generators)."""
    if by_knob and nop.knob_generators:
        return [(f"{nop.family}.{k}", g, float(nop.knob_values.get(k, 0.0))) for k, g in nop.knob_generators.items()]
    if nop.hamiltonian:
        return [(f"{nop.family}.pauli" if by_knob else "total", nop.hamiltonian, 1.0)]
    return []


def _propagate(items: tuple, n: int, by_knob: bool, memo: dict) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """(ideal unitary, group -> Hamiltonian pushed to the end) of a sequence of items.

    Recurrence per layer: H <- U_L H U_L† + Σ_op H_op; a repeat of N adds U_b^N H U_b^{-N} + S_N(H_b)
    with S_N the periodic closed form."""
    from budget.engines.periodic import cycle_basis, periodic_sum

    d = 2**n
    u = np.eye(d, dtype=complex)
    hs: dict[str, np.ndarray] = {}
    for item in items:
        if isinstance(item, NoisyLayer):
            step = np.eye(d, dtype=complex)
            for nop in item.operations:
                step = _embed(nop.op.unitary(), nop.qubits, n) @ step
            hs = {k: step @ h @ step.conj().T for k, h in hs.items()}
            u = step @ u
            for nop in item.operations:
                for name, gen, scale in _op_terms(nop, by_knob):
                    local = sum(c * scale * pauli_matrix(p) for p, c in gen.items())
                    hs[name] = hs.get(name, 0) + _embed(local, nop.qubits, n)
        else:
            if id(item) not in memo:
                ub, hb = _propagate(item.body, n, by_knob, memo)
                memo[id(item)] = (cycle_basis(ub), hb)
            basis, hb = memo[id(item)]
            p = basis.power(item.count)
            hs = {k: p @ h @ p.conj().T for k, h in hs.items()}
            u = p @ u
            for k, h in hb.items():
                hs[k] = hs.get(k, 0) + periodic_sum(basis, h, item.count)
    return u, hs


def _check_size(block: NoisyCircuit) -> None:
    if block.num_qubits > MAX_QUBITS:
        raise ValueError(f"{block.source}: {block.num_qubits} qubits; the cycle analysis needs at most {MAX_QUBITS}")


def cycle_errors(block: NoisyCircuit) -> CycleErrors:
    """Propagate every knob's first-order Hamiltonian through one cycle (see module docstring).

    Raises:
        ValueError: more than :data:`MAX_QUBITS` qubits.
    """
    _check_size(block)
    u, hs = _propagate(block.body, block.num_qubits, True, {})
    local: dict[str, float] = {}
    for layer, mult in block.multiplicities():
        for nop in layer.operations:
            for name, gen, scale in _op_terms(nop, True):
                size = abs(scale) * float(np.sqrt(sum(c * c for c in gen.values())))
                local[name] = local.get(name, 0.0) + mult * size
    names = tuple(sorted(hs))
    d = u.shape[0]
    stack = np.array([hs[k] for k in names]) if names else np.zeros((0, d, d), dtype=complex)
    return CycleErrors(u, names, stack, tuple(local.get(k, 0.0) for k in names))


def cycle_hamiltonian(block: NoisyCircuit) -> tuple[np.ndarray, np.ndarray]:
    """(U_c, H_c): the cycle's ideal unitary and the sum of every operation's exact Hamiltonian
    error pushed to the end of the cycle (the generators engine's coherent input for a repeat)."""
    _check_size(block)
    u, hs = _propagate(block.body, block.num_qubits, False, {})
    return u, hs.get("total", np.zeros_like(u))


def components_or_note(block: NoisyCircuit, metric: str) -> tuple[tuple[Component, ...], str | None]:
    """The components of ``block`` or, when the cycle is too large, none and a note in words."""
    if block.num_qubits > MAX_QUBITS:
        return (), (
            f"which errors build up versus echo away is computed for cycles of up to {MAX_QUBITS} qubits; "
            f"this one has {block.num_qubits}"
        )
    return cycle_errors(block).components(), None
