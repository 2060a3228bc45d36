"""Is an operation Clifford? Its local tableau, read from its matrix by stim.

A unitary U on k qubits is Clifford when it maps every Pauli to a Pauli under conjugation; it is
enough to check the 2k generators X_j, Z_j (Gottesman, "The Heisenberg representation of quantum
computers", arXiv:quant-ph/9807006 (1998)). The check works on the ideal matrix, so every table
gate is covered (x, y, z, h, s, sdg, sx, sxdg, cx, cy, cz, swap, iswap, and rx/ry/rz/p/u/cp/rzz with
angles at multiples of π/2) as well as fallback ``unitary`` gates.

stim reads the tableau (``stim.Tableau.from_unitary_matrix``; Gidney, "Stim: a fast stabilizer
circuit simulator", Quantum 5, 497 (2021)); stim snaps loosely, so the matrix is then held to
:data:`TOLERANCE`: each conjugated generator must be the tableau's signed Pauli to within ``tol`` in
every Pauli coefficient; an angle π/2 + ε passes for |ε| ≲ 2·tol. The small difference is then
ignored (the snapped Clifford is the ideal gate).

Local Paulis are in the bit form of :mod:`budget.pauli_algebra`: (x bits, z bits, e) meaning
i^e X^x Z^z with the X factors first, qubits in gate order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

import numpy as np
import stim

from budget.circuit.ir import Operation
from budget.pauli_algebra import LocalPauli, pauli_coefficients, pauli_labels, pauli_matrix

TOLERANCE = 1e-9
"""Largest Pauli coefficient allowed off the dominant one (dimensionless; ≈ half an angle offset)."""


def _label(ps: stim.PauliString) -> str:
    return "".join("IXYZ"[ps[q]] for q in range(len(ps)))


def _bits(ps: stim.PauliString) -> LocalPauli:
    """(x, z, e) of a stim Pauli string with sign ±1."""
    codes = [ps[q] for q in range(len(ps))]  # 0..3 = I, X, Y, Z
    x = tuple(int(c in (1, 2)) for c in codes)
    z = tuple(int(c in (2, 3)) for c in codes)
    return x, z, (codes.count(2) + (2 if ps.sign == -1 else 0)) % 4


def _outputs(tab: stim.Tableau) -> list[stim.PauliString]:
    """Images of X_0..X_{k-1}, Z_0..Z_{k-1}."""
    k = len(tab)
    return [tab.x_output(j) for j in range(k)] + [tab.z_output(j) for j in range(k)]


def clifford_tableau(unitary: np.ndarray, tol: float = TOLERANCE) -> stim.Tableau | None:
    """The stim tableau of ``unitary`` (gate order, first qubit most significant; it maps P to
    U P U†), or None when the matrix is not Clifford to within ``tol`` (module docstring).

    >>> str(clifford_tableau(np.array([[0, 1j], [1, 0]])).z_output(0))
    '-Z'
    >>> clifford_tableau(np.diag([1, np.exp(0.25j * np.pi)])) is None
    True
    """
    u = np.asarray(unitary, dtype=complex)
    k = u.shape[0].bit_length() - 1
    try:
        tab = stim.Tableau.from_unitary_matrix(u, endian="big")
    except ValueError:
        return None
    gens = np.array([pauli_matrix("".join(c if i == j else "I" for i in range(k))) for c in "XZ" for j in range(k)])
    coeffs = pauli_coefficients(np.concatenate([u @ gens @ u.conj().T, u.conj().T @ gens @ u]))
    index = {label: i for i, label in enumerate(pauli_labels(k))}
    for row, ps in zip(coeffs, _outputs(tab) + _outputs(tab.inverse())):
        at = index[_label(ps)]
        c, rest = row[at], np.delete(row, at)
        if rest.size and np.max(np.abs(rest)) > tol or abs(abs(c) - 1) > 2 * tol or abs(c.imag) > 2 * tol:
            return None
        if (c.real < 0) != (ps.sign == -1):
            return None
    return tab


def conjugated_label(tab: stim.Tableau, label: str) -> tuple[int, str]:
    """(sign, label) with U P U† = sign · P_label for the Clifford U of ``tab``.

    >>> conjugated_label(clifford_tableau(np.array([[1, 1], [1, -1]]) / np.sqrt(2)), "Y")
    (-1, 'Y')
    """
    out = tab(stim.PauliString(label))
    return int(out.sign.real), _label(out)


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
    tab = clifford_tableau(unitary, tol)
    if tab is None:
        return None
    k = len(tab)
    return LocalClifford(k, tuple(map(_bits, _outputs(tab))), tuple(map(_bits, _outputs(tab.inverse()))),
                         tab == stim.Tableau(k))


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
