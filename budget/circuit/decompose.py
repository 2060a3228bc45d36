"""Standard-library gates outside the gate table, written as sequences of table gates.

The error model works on one- and two-qubit operations of the gate table
(:mod:`budget.circuit.gates`). OpenQASM's standard libraries (``qelib1.inc``, ``stdgates.inc``)
name a few more gates; readers replace each by the exact sequence below, so every resulting
operation carries its own errors. Each sequence equals the gate's matrix exactly (not only up to
global phase); tests/test_readers.py checks every one against cirq.

- ``ccx`` (Toffoli): 6 CNOT + 7 T/T† + 2 H, Nielsen & Chuang, *Quantum Computation and Quantum
  Information* (Cambridge, 2000), Fig. 4.9 (also the ``ccx`` body of OpenQASM 2's qelib1.inc,
  Cross et al., arXiv:1707.03429 (2017)).
- ``cswap`` (Fredkin): CX(c,b) · CCX(a,b,c) · CX(c,b).
- ``ch``: Ry(π/4) on the target, CX, Ry(-π/4): Ry(-π/4) X Ry(π/4) = H.
- ``crx(θ)``: H · CRZ(θ) · H on the target (H Rz H = Rx).
- ``cry(θ)``: Ry(θ/2), CX, Ry(-θ/2), CX (X Ry(φ) X = Ry(-φ)).
- ``cu3(θ, φ, λ)``: the qelib1.inc sequence (controlled U(θ, φ, λ)).
- ``rxx(θ)``: H ⊗ H · RZZ(θ) · H ⊗ H.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

Step = tuple[str, tuple[float, ...], tuple[int, ...]]
"""(gate name, angles in radians, positions into the decomposed gate's qubits)."""


@dataclass(frozen=True)
class Decomposition:
    """A gate written as table gates (or other decompositions), qubits by position."""

    num_qubits: int
    num_params: int
    steps: Callable[..., tuple[Step, ...]]


def _ccx() -> tuple[Step, ...]:
    # Nielsen & Chuang Fig. 4.9; qubits (a, b, c) = (control, control, target) = (0, 1, 2).
    return (
        ("h", (), (2,)),
        ("cx", (), (1, 2)),
        ("tdg", (), (2,)),
        ("cx", (), (0, 2)),
        ("t", (), (2,)),
        ("cx", (), (1, 2)),
        ("tdg", (), (2,)),
        ("cx", (), (0, 2)),
        ("t", (), (1,)),
        ("t", (), (2,)),
        ("h", (), (2,)),
        ("cx", (), (0, 1)),
        ("t", (), (0,)),
        ("tdg", (), (1,)),
        ("cx", (), (0, 1)),
    )


def _cu3(theta: float, phi: float, lam: float) -> tuple[Step, ...]:
    return (
        ("u1", ((lam + phi) / 2,), (0,)),
        ("u1", ((lam - phi) / 2,), (1,)),
        ("cx", (), (0, 1)),
        ("u3", (-theta / 2, 0.0, -(phi + lam) / 2), (1,)),
        ("cx", (), (0, 1)),
        ("u3", (theta / 2, phi, 0.0), (1,)),
    )


DECOMPOSITIONS: dict[str, Decomposition] = {
    "ccx": Decomposition(3, 0, _ccx),
    "cswap": Decomposition(3, 0, lambda: (("cx", (), (2, 1)), ("ccx", (), (0, 1, 2)), ("cx", (), (2, 1)))),
    "ch": Decomposition(2, 0, lambda: (("ry", (np.pi / 4,), (1,)), ("cx", (), (0, 1)), ("ry", (-np.pi / 4,), (1,)))),
    "crx": Decomposition(2, 1, lambda t: (("h", (), (1,)), ("crz", (t,), (0, 1)), ("h", (), (1,)))),
    "cry": Decomposition(
        2, 1, lambda t: (("ry", (t / 2,), (1,)), ("cx", (), (0, 1)), ("ry", (-t / 2,), (1,)), ("cx", (), (0, 1)))
    ),
    "cu3": Decomposition(2, 3, _cu3),
    "rxx": Decomposition(
        2,
        1,
        lambda t: (
            ("h", (), (0,)),
            ("h", (), (1,)),
            ("rzz", (t,), (0, 1)),
            ("h", (), (0,)),
            ("h", (), (1,)),
        ),
    ),
}
"""Gate name -> decomposition into table gates (names not in the gate table only)."""


def expand(name: str, params: tuple[float, ...], qubits: tuple[int, ...]) -> list[Step]:
    """The table-gate sequence for a decomposable gate, on the given qubits (nested ones expanded).

    >>> [s[0] for s in expand("cswap", (), (0, 1, 2))][:3]
    ['cx', 'h', 'cx']
    """
    d = DECOMPOSITIONS[name]
    if len(params) != d.num_params or len(qubits) != d.num_qubits:
        raise ValueError(
            f"gate {name} takes {d.num_params} angle(s) and {d.num_qubits} qubits, "
            f"got {len(params)} and {len(qubits)}"
        )
    out: list[Step] = []
    for gate, angles, where in d.steps(*params):
        mapped = tuple(qubits[i] for i in where)
        if gate in DECOMPOSITIONS:
            out.extend(expand(gate, angles, mapped))
        else:
            out.append((gate, tuple(float(a) for a in angles), mapped))
    return out
