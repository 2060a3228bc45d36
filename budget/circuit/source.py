"""Reading circuit files: one place for the missing-file, unreadable-file and empty-circuit
messages."""

from __future__ import annotations

from pathlib import Path

from budget.circuit.ir import StructuredCircuit
from budget.problems import CircuitSyntaxError, InputError, TooLargeError

MAX_QUBITS = 10_000
"""Most qubits a circuit may declare. The clifford engine's tableau grows with the square of the
qubit count (about 0.5 GB and 10 s for 10,000 qubits on the development machine, measured with a
10,000-qubit circuit of 5,000 CNOTs; docs/benchmarks.md), so larger registers are refused while
reading, before anything is allocated per qubit."""


def read_text(path: str | Path) -> str:
    """The text of a circuit file (UTF-8).

    Raises:
        InputError: ``<path>: circuit file not found``, ``<path>: cannot read the circuit file``,
            or ``<path>: not a text file`` (bytes that are not UTF-8 text, or NUL bytes).
    """
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{p}: circuit file not found") from None
    except OSError as exc:
        raise InputError(f"{p}: cannot read the circuit file: {exc.strerror or exc}") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{p}: not a text file (byte 0x{data[exc.start]:02x} at offset {exc.start} is not UTF-8): "
            "expected OpenQASM or cirq JSON text"
        ) from None
    if "\x00" in text:
        raise InputError(f"{p}: not a text file (NUL byte at offset {text.index(chr(0))}): expected OpenQASM or cirq JSON text")
    if not text.strip():
        raise CircuitSyntaxError(f"{p}: the file is empty: expected a circuit (OpenQASM or cirq JSON)")
    return text


def check_qubit_count(count: int, where: str) -> None:
    """Refuse ``count`` declared qubits above :data:`MAX_QUBITS` (``where``: file:line and what)."""
    if count > MAX_QUBITS:
        raise TooLargeError(
            f"{where}: {count} qubits declared; the limit is {MAX_QUBITS} (memory grows with the square of "
            "the qubit count): declare only the qubits the circuit uses"
        )


def require_content(circuit: StructuredCircuit) -> StructuredCircuit:
    """``circuit`` itself when it has qubits and at least one gate; readers call it last.

    Raises:
        CircuitSyntaxError: no qubit declared, or no gate applied (nothing to analyse).
    """
    if not circuit.num_qubits:
        raise CircuitSyntaxError(
            f"{circuit.source}: declares no qubits, so there is nothing to analyse: declare a register "
            "(qubit[2] q; or qreg q[2];) and apply gates to it"
        )
    if not circuit.body:
        raise CircuitSyntaxError(
            f"{circuit.source}: {circuit.num_qubits} qubit(s) but no gate is applied (loops that never run "
            "count as none), so there is nothing to analyse"
        )
    return circuit
