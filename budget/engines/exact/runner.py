"""Propagation for the exact engine: one register (or a batch of them) carried through the
circuit's items, and the ideal circuit propagated once per register form.

:class:`Runner` walks the noisy tree (budget/circuit/walk.py) and hands each operation's local
matrix (budget/engines/exact/local.py) to the fuser (budget/engines/exact/register.py); a
repeated block is unrolled or replaced by its block matrix to the power N
(budget/engines/exact/power.py), as the plan chose (budget/engines/exact/plan.py). Local matrices
are built once per operation content and run.

A batch of B registers goes through the circuit in one walk when the local matrices are stacks
of B matrices (one per member): the family-split runs (budget/engines/exact/split.py) differ only
in which operations carry their errors, so they share the walk, the fusion and the products'
Python overhead; each member's numbers are those of its own run.

:class:`Ideal` holds the ideal circuit: U_ideal (or U_ideal|0…0>) and, for superoperators, its
Pauli transfer matrix R_ideal, whose powered blocks are the transfer matrices of the unitary
blocks' powers (Schur form). A run and its family-split runs read their values against it.
"""

from __future__ import annotations

from functools import reduce
from typing import Callable

import numpy as np

from budget.circuit.walk import Kind, gate_kind
from budget.circuit.ir import Operation
from budget.engines.exact.local import PAULI_BASIS, pauli_transfer, site_unitary, to_interleaved
from budget.engines.exact.power import channel_power, unitary_power
from budget.engines.exact.readout import unitary_ptm
from budget.engines.exact.register import Fuser, Register
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyRepeat
from budget.errors.normal_form import SiteErrors, layer_errors
from budget.memo import ObjectKey


class Runner:
    """Propagates one register (or a batch of ``batch``) through the circuit's items with one kind
    of local matrix; ``local``/``idle`` return a matrix, or a stack of ``batch`` matrices."""

    def __init__(
        self,
        n: int,
        site_dim: int,
        local: Callable[[SiteErrors, Operation | None], np.ndarray | None],
        powered: dict[ObjectKey, bool],
        power: Callable[[NoisyRepeat], np.ndarray] | None = None,
        batch: int = 1,
    ) -> None:
        self.n, self.s, self.batch = n, site_dim, batch
        self._local = local
        self._powered = powered
        self._power_of = power  # a powered block's matrix from elsewhere (the ideal Pauli run)
        self._cache: dict[tuple, np.ndarray | None] = {}
        self._layers: dict[ObjectKey, list[tuple[tuple[int, ...], np.ndarray]]] = {}
        self._powers: dict[ObjectKey, np.ndarray] = {}
        self.methods: set[str] = set()

    def layer(self, layer: NoisyLayer) -> list[tuple[tuple[int, ...], np.ndarray]]:
        """(qubits, local matrix) of each site of the layer's normal form that acts, in channel
        order (budget/errors/normal_form.py: an operation's errors after its ideal gate, idle
        relaxation, context errors)."""
        hit = self._layers.get(ObjectKey(layer))
        if hit is None:
            hit = []
            ops = layer.operations
            for i, errors in enumerate(layer_errors(layer)):
                gate = ops[i].op if i < len(ops) else None
                key = content_key(errors, gate)
                if key not in self._cache:
                    self._cache[key] = self._local(errors, gate)
                if self._cache[key] is not None:
                    hit.append((errors.qubits, self._cache[key]))
            self._layers[ObjectKey(layer)] = hit
        return hit

    def run(self, items: tuple[NoisyItem, ...], reg: Register) -> Register:
        fuser = Fuser(reg)
        self._walk(items, reg, fuser)
        fuser.flush()
        return reg

    def _walk(self, items: tuple[NoisyItem, ...], reg: "Register | Program", fuser: Fuser) -> None:
        for it in items:
            if gate_kind(it, "exact engine") is Kind.LAYER:
                for qubits, m in self.layer(it):
                    fuser.add(qubits, m)
            elif self._powered.get(ObjectKey(it), False):
                fuser.flush()
                reg.apply_full(self.power(it))
            else:  # unrolled: fuse the body once, then apply its fused matrices N times
                fuser.flush()
                program = Program(reg.s)
                inner = Fuser(program)
                self._walk(it.body, program, inner)
                inner.flush()
                for _ in range(it.count):
                    program.replay(reg)

    def power(self, rep: NoisyRepeat) -> np.ndarray:
        """The block matrix of ``rep`` to the power N (a stack of B for a batch), built once."""
        p = self._powers.get(ObjectKey(rep))
        if p is None and self._power_of is not None:
            p = self._powers[ObjectKey(rep)] = self._power_of(rep)
        elif p is None:
            dtype = complex if self.s == 2 else float
            block = self.run(rep.body, Register.identity(self.n, self.s, dtype, self.batch)).canonical()
            blocks = [self._block_power(b, rep.count) for b in block.reshape((-1,) + block.shape[-2:])]
            p = blocks[0] if self.batch == 1 else np.stack(blocks)
            self._powers[ObjectKey(rep)] = p
        return p

    def _block_power(self, block: np.ndarray, count: int) -> np.ndarray:
        if self.s == 2:
            self.methods.add("schur")
            return unitary_power(block.copy(), count)
        p, method = channel_power(block.copy(), count)
        self.methods.add(method)
        return np.ascontiguousarray(p.real)  # a real Pauli transfer matrix


class Program:
    """The fused matrices of one pass through a repeated block, recorded in order and replayed N
    times when the block is unrolled (one fusion per block instead of one per repetition; the
    products are the same, grouped at the block's edges)."""

    def __init__(self, site_dim: int) -> None:
        self.s = site_dim
        self.steps: list[tuple[tuple[int, ...] | None, np.ndarray]] = []

    def apply(self, qubits: tuple[int, ...], matrix: np.ndarray) -> None:
        self.steps.append((qubits, matrix))

    def apply_full(self, matrix: np.ndarray) -> None:
        self.steps.append((None, matrix))

    def replay(self, reg: "Register | Program") -> None:
        for qubits, matrix in self.steps:
            if qubits is None:
                reg.apply_full(matrix)
            else:
                reg.apply(qubits, matrix)


def content_key(errors: SiteErrors, gate: Operation | None) -> tuple:
    """Sites with equal content share one local matrix (built once per run): the ideal gate, the
    error terms, where on the site each relaxation acts, and the family (a batch of family runs
    stacks by family)."""
    return (
        None if gate is None else (gate.gate, gate.params, None if gate.matrix is None else np.asarray(gate.matrix).tobytes()),
        len(errors.qubits),
        None if errors.unitary is None else np.asarray(errors.unitary).tobytes(),
        errors.stochastic,
        errors.groups,
        tuple((errors.qubits.index(r.qubit), r.gamma, r.dephasing_factor) for r in errors.relaxation),
        errors.source.family,
    )


def propagate(runner: Runner, circuit: NoisyCircuit, operator: bool) -> np.ndarray:
    """Identity (operator forms) or |0…0> propagated through the circuit, as (s^n, C), or
    (B, s^n, C) for a batch."""
    n, s, batch = circuit.num_qubits, runner.s, runner.batch
    dtype = complex if s == 2 else float
    if operator:
        reg = Register.identity(n, s, dtype, batch)
    else:  # |0…0>, or |0><0| = (1 + Z)/2 per qubit
        state = np.eye(1, 2**n, dtype=dtype)[0] if s == 2 else zero_state_pauli(n)
        reg = Register(np.tile(state, batch), n, s, batch)
    return runner.run(circuit.body, reg).canonical()


def zero_state_pauli(n: int) -> np.ndarray:
    """|0…0><0…0| in the normalised Pauli basis: coefficients (1, 0, 0, 1)/√2 per qubit."""
    return reduce(np.kron, [PAULI_BASIS[:, 0].real] * n)


def ideal_transfer(errors: SiteErrors, gate: Operation | None) -> np.ndarray | None:
    """The real Pauli transfer matrix of a site's ideal gate (no errors); None without a gate."""
    if gate is None:
        return None
    u, k = np.asarray(gate.unitary(), dtype=complex), len(errors.qubits)
    return pauli_transfer(to_interleaved(np.kron(u, u.conj()), k), k)


class Ideal:
    """The ideal circuit propagated at most once per register form (module docstring).

    Args:
        circuit: the noisy circuit (only its ideal gates are read).
        operator: True for the process metric (operators), False for the state metric.
        unitary_powered, transfer_powered: the plan's choice of powered blocks for the unitary
            (site dimension 2) and the Pauli transfer matrix (site dimension 4).
    """

    def __init__(self, circuit: NoisyCircuit, operator: bool, unitary_powered: dict[ObjectKey, bool],
                 transfer_powered: dict[ObjectKey, bool]) -> None:
        n = circuit.num_qubits
        self._circuit, self._operator = circuit, operator
        self._unitary_runner = Runner(n, 2, lambda e, gate: site_unitary(e, gate, ideal=True), unitary_powered)
        self._transfer_runner = Runner(n, 4, ideal_transfer, transfer_powered,
                                       power=lambda rep: unitary_ptm(self._unitary_runner.power(rep), n))
        self._unitary: np.ndarray | None = None
        self._transfer: np.ndarray | None = None

    @property
    def methods(self) -> set[str]:
        """How the powered blocks were taken (``schur``)."""
        return self._unitary_runner.methods

    def unitary(self) -> np.ndarray:
        """U_ideal as (2^n, 2^n), or the ideal output state as (2^n, 1)."""
        if self._unitary is None:
            self._unitary = propagate(self._unitary_runner, self._circuit, self._operator)
        return self._unitary

    def transfer(self) -> np.ndarray:
        """R_ideal, (4^n, 4^n) real."""
        if self._transfer is None:
            self._transfer = propagate(self._transfer_runner, self._circuit, True)
        return self._transfer
