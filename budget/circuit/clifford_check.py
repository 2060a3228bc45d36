"""Is an operation Clifford? Its local tableau, read from its matrix.

A unitary U on k qubits is Clifford when it maps every Pauli to a Pauli under conjugation; it is
enough to check the 2k generators X_j, Z_j (Gottesman, "The Heisenberg representation of quantum
computers", arXiv:quant-ph/9807006 (1998)). The check works on the ideal matrix, so every table
gate is covered (x, y, z, h, s, sdg, sx, sxdg, cx, cy, cz, swap, iswap, and rx/ry/rz/p/u/cp/rzz with
angles at multiples of π/2) as well as fallback ``unitary`` gates.

A local Pauli is written (x bits, z bits, e): the operator i^e X^x Z^z with the X factors first,
qubits in gate order. A Hermitian Pauli label such as ``"XY"`` has e = number of Y letters (Y = iXZ).

The tolerance: a gate counts as Clifford when each conjugated generator is a signed Pauli to within
``tol`` in every Pauli coefficient; an angle π/2 + ε passes for |ε| ≲ 2·tol. The small difference is
then ignored (the snapped Clifford is the ideal gate).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

import numpy as np

from budget.circuit.ir import Operation
from budget.errors.fidelity import pauli_decompose, pauli_labels, pauli_matrix

TOLERANCE = 1e-9
"""Largest Pauli coefficient allowed off the dominant one (dimensionless; ≈ half an angle offset)."""

LocalPauli = tuple[tuple[int, ...], tuple[int, ...], int]
"""(x bits, z bits, e) meaning i^e X^x Z^z on the gate's qubits in gate order."""


def label_bits(label: str) -> LocalPauli:
    """The (x, z, e) form of a Hermitian Pauli label.

    >>> label_bits("XY")
    ((1, 1), (0, 1), 1)
    """
    x = tuple(int(c in "XY") for c in label)
    z = tuple(int(c in "YZ") for c in label)
    return x, z, label.count("Y") % 4


def _as_pauli(m: np.ndarray, tol: float) -> LocalPauli | None:
    """The signed Pauli equal to Hermitian ``m`` (to ``tol``), or None if it is not one."""
    k = int(round(np.log2(m.shape[0])))
    coeffs = np.array(list(pauli_decompose(m).values()))
    best = int(np.argmax(np.abs(coeffs)))
    rest = np.delete(coeffs, best)
    c = coeffs[best]
    if rest.size and np.max(np.abs(rest)) > tol or abs(abs(c) - 1) > 2 * tol or abs(c.imag) > 2 * tol:
        return None
    x, z, e = label_bits(pauli_labels(k)[best])
    return x, z, (e + (2 if c.real < 0 else 0)) % 4


@dataclass(frozen=True)
class LocalClifford:
    """The action of a k-qubit Clifford gate U on Paulis, both ways.

    Attributes:
        num_qubits: k (1 or 2).
        forward: images U G U† of the generators G = X_0..X_{k-1}, Z_0..Z_{k-1} (push a Pauli
            through the gate, Heisenberg picture run forwards).
        backward: images U† G U of the same generators (pull a Pauli back through the gate).
    """

    num_qubits: int
    forward: tuple[LocalPauli, ...]
    backward: tuple[LocalPauli, ...]
    is_identity: bool = False
    """True when U acts trivially on every Pauli (U ∝ identity)."""


def local_clifford(unitary: np.ndarray, tol: float = TOLERANCE) -> LocalClifford | None:
    """The local tableau of ``unitary`` (gate order, first qubit most significant), or None when
    the matrix is not Clifford to within ``tol``.

    >>> import cirq
    >>> local_clifford(cirq.unitary(cirq.H)).forward
    (((0,), (1,), 0), ((1,), (0,), 0))
    >>> local_clifford(cirq.unitary(cirq.T)) is None
    True
    """
    u = np.asarray(unitary, dtype=complex)
    k = int(round(np.log2(u.shape[0])))
    gens = [pauli_matrix("".join("X" if i == j else "I" for i in range(k))) for j in range(k)]
    gens += [pauli_matrix("".join("Z" if i == j else "I" for i in range(k))) for j in range(k)]
    fwd, bwd = [], []
    for g in gens:
        a = _as_pauli(u @ g @ u.conj().T, tol)
        b = _as_pauli(u.conj().T @ g @ u, tol)
        if a is None or b is None:
            return None
        fwd.append(a)
        bwd.append(b)
    unit = [label_bits("".join(c if i == j else "I" for i in range(k))) for c in "XZ" for j in range(k)]
    return LocalClifford(k, tuple(fwd), tuple(bwd), tuple(fwd) == tuple(unit))


_CACHE: dict[tuple, LocalClifford | None] = {}


def operation_clifford(op: Operation, tol: float = TOLERANCE) -> LocalClifford | None:
    """:func:`local_clifford` of an operation's ideal unitary, cached by gate name and angles."""
    key = (op.gate, op.params, tol) if op.matrix is None else (op.gate, op.matrix.tobytes(), tol)
    if key not in _CACHE:
        _CACHE[key] = local_clifford(op.unitary(), tol)
    return _CACHE[key]


def is_clifford(op: Operation, tol: float = TOLERANCE) -> bool:
    """True when the operation's ideal gate is Clifford (angles at multiples of π/2 within tol).

    >>> is_clifford(Operation("rx", (0,), (np.pi / 2,))), is_clifford(Operation("rx", (0,), (0.3,)))
    (True, False)
    """
    return operation_clifford(op, tol) is not None


def first_non_clifford(operations: Iterable[Operation], tol: float = TOLERANCE) -> Operation | None:
    """The first operation whose ideal gate is not Clifford, or None when all are."""
    for op in operations:
        if operation_clifford(op, tol) is None:
            return op
    return None
