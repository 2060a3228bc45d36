"""Independent references for the circuit readers: cirq's own OpenQASM importer and simulator.

cirq.contrib.qasm_import (cirq's OpenQASM 2 importer, built on ply) rejects ``barrier``; barrier
statements have no effect on the unitary, so they are removed before the text is handed to it.
"""

from __future__ import annotations

import re
from pathlib import Path

import cirq
import numpy as np

from budget.circuit.ir import StructuredCircuit

PUBLIC_QASM = Path(__file__).resolve().parents[1].parent / "shared" / "qasm-public"
"""Public OpenQASM 2 benchmark circuits (../shared/qasm-public from the project root)."""

_BARRIER = re.compile(r"^\s*barrier\b[^;]*;", re.MULTILINE)


def cirq_from_qasm(text: str) -> cirq.Circuit:
    """cirq's own reading of an OpenQASM text (barriers removed first), user gates unrolled
    (cirq's importer keeps each call of a user ``gate`` as a CircuitOperation)."""
    from cirq.contrib.qasm_import import circuit_from_qasm

    return cirq.unroll_circuit_op(circuit_from_qasm(_BARRIER.sub("", text)), deep=True, tags_to_check=None)


def cirq_name(display: str) -> str:
    """cirq's importer names qubit ``reg[3]`` as ``NamedQubit('reg_3')``."""
    return display.replace("[", "_").replace("]", "")


def unitary_of(circ: StructuredCircuit) -> np.ndarray:
    """Unitary of the unrolled circuit, qubit 0 most significant, built with cirq MatrixGates."""
    qs = cirq.LineQubit.range(circ.num_qubits)
    c = cirq.Circuit()
    for layer in circ.iter_layers():
        c.append(cirq.Moment(cirq.MatrixGate(op.unitary()).on(*(qs[i] for i in op.qubits)) for op in layer.operations))
    return c.unitary(qubit_order=qs)


def assert_same_action(ours: StructuredCircuit, ref: cirq.Circuit, *, states: int = 2, seed: int = 1) -> None:
    """Both circuits map random input states to the same output state up to a global phase
    (|<a|b>| = 1 for Haar-random inputs; cheaper than full unitaries on ten qubits)."""
    order = [cirq.NamedQubit(cirq_name(n)) for n in ours.qubits]
    mine = cirq.Circuit(
        cirq.MatrixGate(op.unitary()).on(*(order[i] for i in op.qubits))
        for layer in ours.iter_layers()
        for op in layer.operations
    )
    theirs = cirq.drop_terminal_measurements(ref)
    dim = 2 ** len(order)
    for k in range(states):
        psi = cirq.testing.random_superposition(dim, random_state=seed + k).astype(np.complex128)
        a = cirq.final_state_vector(mine, initial_state=psi, qubit_order=order, dtype=np.complex128)
        b = cirq.final_state_vector(theirs, initial_state=psi, qubit_order=order, dtype=np.complex128)
        assert abs(abs(np.vdot(a, b)) - 1) < 1e-9, "output states differ"


def reference_unitary(ref: cirq.Circuit, qubit_names: tuple[str, ...]) -> np.ndarray:
    """Unitary of a cirq circuit without its measurements, qubits in the order of ``qubit_names``
    (display names of our reader, matched to cirq's names)."""
    order = [cirq.NamedQubit(cirq_name(n)) for n in qubit_names]
    return cirq.drop_terminal_measurements(ref).unitary(qubit_order=order)


def assert_same_unitary(a: np.ndarray, b: np.ndarray, atol: float = 1e-8) -> None:
    """Equal up to a global phase."""
    assert a.shape == b.shape
    assert cirq.allclose_up_to_global_phase(a, b, atol=atol), "unitaries differ beyond a global phase"
