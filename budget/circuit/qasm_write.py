"""Write a StructuredCircuit as OpenQASM 3 (repeats as ``for`` loops, kept folded).

Gate names are the gate table's, which are OpenQASM's standard-library names (``stdgates.inc``)
except ``sxdg``, ``rzz`` and ``iswap``, which this project's reader knows from its table (another
tool may need their definitions). Angles are written with 17 significant digits so that reading
the file back gives the same numbers. Qubit names must look like ``reg[i]``.
"""

from __future__ import annotations

import re

from budget.circuit.ir import StructuredCircuit
from budget.circuit.walk import Kind, item_kind, kind_of
from budget.problems import InputError

_NAME = re.compile(r"([A-Za-z_][A-Za-z0-9_]*)\[(\d+)\]")


def to_qasm3(circuit: StructuredCircuit, *, header: str = "") -> str:
    """OpenQASM 3 text of ``circuit``; ``header`` lines become ``//`` comments at the top.

    Raises:
        InputError: a qubit name that is not ``reg[i]`` (e.g. cirq's ``q(0, 1)``) or a gate known
            only by its matrix.
    """
    regs: dict[str, int] = {}
    for name in circuit.qubits:
        m = _NAME.fullmatch(name)
        if m is None:
            raise InputError(f"{circuit.source}: qubit {name!r} has no OpenQASM name (reg[i]); "
                             "the corrected circuit cannot be written as OpenQASM")
        regs[m.group(1)] = max(regs.get(m.group(1), 0), int(m.group(2)) + 1)
    lines = [f"// {h}" for h in header.splitlines()] + ["OPENQASM 3.0;", 'include "stdgates.inc";', ""]
    lines += [f"qubit[{n}] {r};" for r, n in regs.items()]
    if circuit.measured:
        lines.append(f"bit[{len(circuit.measured)}] meas;")
    lines.append("")
    depth = [0]

    def walk(items: tuple, indent: str) -> None:
        for it in items:
            kind = kind_of(it, "OpenQASM writer")
            if kind is Kind.LAYER:
                for op in it.operations:
                    if op.gate == "unitary":
                        raise InputError(f"{circuit.source}: operation {op.label or 'unitary'} on "
                                         f"{', '.join(circuit.qubits[q] for q in op.qubits)} has no OpenQASM name")
                    args = f"({', '.join(repr(float(p)) for p in op.params)})" if op.params else ""
                    lines.append(f"{indent}{op.gate}{args} {', '.join(circuit.qubits[q] for q in op.qubits)};")
            elif kind is Kind.REPEAT:
                var = f"i{depth[0]}"
                depth[0] += 1
                lines.append(f"{indent}for int {var} in [0:{it.count - 1}] {{")
                walk(it.body, indent + "  ")
                lines.append(f"{indent}}}")
            else:
                raise InputError(f"{circuit.source}: writing a {item_kind(it)} item as OpenQASM is not supported")

    walk(circuit.body, "")
    for j, q in enumerate(circuit.measured):
        lines.append(f"meas[{j}] = measure {circuit.qubits[q]};")
    return "\n".join(lines) + "\n"
