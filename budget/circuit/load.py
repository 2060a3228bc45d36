"""One entry point for every circuit input: a path (``.qasm``, ``.json``) or a cirq circuit."""

from __future__ import annotations

from pathlib import Path

from typing import TYPE_CHECKING

from budget.circuit.ir import StructuredCircuit
from budget.circuit.qasm import read_qasm
from budget.problems import InputError

if TYPE_CHECKING:
    import cirq

QASM_SUFFIXES = (".qasm", ".qasm2", ".qasm3")
JSON_SUFFIXES = (".json",)


def load_circuit(source: "str | Path | cirq.AbstractCircuit") -> StructuredCircuit:
    """Read a circuit, dispatching on its type and file extension.

    - ``cirq.Circuit`` (or ``FrozenCircuit``): :func:`budget.circuit.cirq_reader.from_cirq`.
    - ``*.qasm``: OpenQASM; the ``OPENQASM 2.0;`` / ``OPENQASM 3;`` header decides the version.
    - ``*.json``: a circuit saved with ``cirq.to_json``.

    A string is always a path, never circuit text (use :func:`budget.circuit.qasm.parse_qasm`).

    Raises:
        InputError: missing file or unknown extension (the message names the file).
        CircuitSyntaxError: the file cannot be read as a circuit (message starts ``file:line``).
    """
    if type(source).__module__.startswith("cirq"):
        import cirq  # slow optional import: cirq objects only (cirq takes seconds to import)

        from budget.circuit.cirq_reader import from_cirq  # slow optional import: imports cirq

        if isinstance(source, cirq.AbstractCircuit):
            return from_cirq(source)
    if not isinstance(source, (str, Path)):
        raise TypeError(f"load_circuit expects a path or a cirq.Circuit, got {type(source).__name__}")
    path = Path(source)
    if not path.is_file():
        raise InputError(f"{path}: circuit file not found" + (" (it is a directory)" if path.is_dir() else ""))
    suffix = path.suffix.lower()
    if suffix in QASM_SUFFIXES:
        return read_qasm(path)
    if suffix in JSON_SUFFIXES:
        from budget.circuit.cirq_reader import read_cirq_json  # slow optional import: imports cirq

        return read_cirq_json(path)
    known = ", ".join(QASM_SUFFIXES + JSON_SUFFIXES)
    raise InputError(f"{path}: unknown circuit format {suffix or '(no extension)'!r}: expected one of {known}")
