"""OpenQASM qubit registers and the qubits each gate operand names (indices, ranges, broadcast)."""

from __future__ import annotations

from typing import Iterator

from openqasm3 import ast

from budget.circuit.qasm_expr import Number, evaluate_int, line_of
from budget.circuit.source import check_qubit_count
from budget.problems import CircuitSyntaxError, place


class Registers:
    """Declared qubits: display names in declaration order and each register's indices.

    Args:
        source: the file name, for messages.
        lines: the source text split into lines (to read a range's raw text).
        consts: the program's constants, used in indices and sizes (shared, kept up to date by
            the reader).
    """

    def __init__(self, source: str, lines: list[str], consts: dict[str, Number]) -> None:
        self.source = source
        self.lines = lines
        self.consts = consts
        self.names: list[str] = []
        self.table: dict[str, tuple[list[int], bool]] = {}  # name -> (indices, is_register)

    def error(self, node: ast.QASMNode, what: str) -> CircuitSyntaxError:
        return CircuitSyntaxError(f"{place(self.source, line_of(node))}: {what}")

    def integer(self, expr: ast.Expression, what: str) -> int:
        return evaluate_int(expr, self.consts, source=self.source, what=what)

    def check_range(self, r: ast.RangeDefinition) -> None:
        """The reference parser reads ``[::2]`` like ``[:2]``: refuse a range with ``::`` in it."""
        span = r.span
        if span is not None and span.start_line == span.end_line and 0 < span.start_line <= len(self.lines):
            raw = self.lines[span.start_line - 1][span.start_column : span.end_column + 1]
            if "::" in raw:
                raise self.error(r, f"range '{raw}' omits a part next to its step: write start:step:end in full")

    def declare(self, name: str, size: int | None, node: ast.QASMNode) -> None:
        if name in self.table:
            raise self.error(node, f"qubit register '{name}' is declared twice")
        if size is not None and size < 1:
            raise self.error(node, f"qubit register '{name}' has size {size}: expected at least 1")
        start = len(self.names)
        check_qubit_count(start + (1 if size is None else size), f"{place(self.source, line_of(node))}: register '{name}'")
        if size is None:
            self.names.append(name)
            self.table[name] = ([start], False)
        else:
            self.names.extend(f"{name}[{i}]" for i in range(size))
            self.table[name] = (list(range(start, start + size)), True)

    def operand(self, node: ast.Identifier | ast.IndexedIdentifier) -> tuple[list[int], bool]:
        """Qubit indices an operand names, and whether it names a register (broadcast) or one qubit."""
        ident = node if isinstance(node, ast.Identifier) else node.name
        name = ident.name
        if name not in self.table:
            if name.startswith("$") and name[1:].isdigit() and isinstance(node, ast.Identifier):
                self.declare(name, None, node)  # physical qubit, declared on first use
            else:
                raise self.error(node, f"unknown qubit or register '{name}'")
        indices, is_register = self.table[name]
        if isinstance(node, ast.Identifier):
            return list(indices), is_register
        if len(node.indices) != 1 or not is_register:
            shape = "a multi-dimensional array" if is_register else "a register"
            raise self.error(node, f"'{name}' indexed as {shape}")
        (index,) = node.indices
        if isinstance(index, ast.DiscreteSet):
            picks = [self.integer(v, f"index of {name}") for v in index.values]
            many = True
        elif len(index) == 1 and isinstance(index[0], ast.RangeDefinition):
            r = index[0]
            self.check_range(r)
            start = 0 if r.start is None else self.integer(r.start, f"range start of {name}")
            end = len(indices) - 1 if r.end is None else self.integer(r.end, f"range end of {name}")
            step = 1 if r.step is None else self.integer(r.step, f"range step of {name}")
            if step == 0:
                raise self.error(node, f"range step of {name} is 0")
            picks = list(range(start, end + (1 if step > 0 else -1), step))
            many = True
        elif len(index) == 1:
            picks, many = [self.integer(index[0], f"index of {name}")], False
        else:
            raise self.error(node, f"'{name}' indexed with {len(index)} indices: registers are one-dimensional")
        for i in picks:
            if not 0 <= i < len(indices):
                raise self.error(node, f"index {i} is out of range for register {name}[{len(indices)}]")
        return [indices[i] for i in picks], many

    def broadcast(self, st: ast.QuantumGate) -> Iterator[tuple[int, ...]]:
        """OpenQASM broadcasting: registers of equal size run in parallel, single qubits repeat."""
        operands = [self.operand(q) for q in st.qubits]
        sizes = {len(idx) for idx, many in operands if many}
        if len(sizes) > 1:
            described = ", ".join(f"{len(idx)}" for idx, many in operands if many)
            raise self.error(st, f"gate {st.name.name}: registers of different sizes ({described}) cannot be broadcast")
        n = sizes.pop() if sizes else 1
        for k in range(n):
            yield tuple(idx[k] if many else idx[0] for idx, many in operands)
