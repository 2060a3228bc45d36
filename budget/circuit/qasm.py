"""OpenQASM 2.0 and 3 reader: text -> flat program -> :class:`StructuredCircuit`.

The reader walks the reference syntax tree (:mod:`budget.circuit.qasm_parse`), expands gate
calls into table operations (user ``gate`` definitions are inlined with their parameters
substituted; standard gates outside the table are replaced by the sequences of
:mod:`budget.circuit.decompose`), keeps ``for`` loops as loops, and hands the flat program to
:func:`budget.graph.layer_program`. What it accepts and rejects is written down in
docs/circuit-formats.md.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from openqasm3 import ast

from budget.circuit.decompose import DECOMPOSITIONS, expand
from budget.circuit.gates import ALIASES, GATES
from budget.circuit.ir import Operation, StructuredCircuit
from budget.circuit.program import Barrier, Loop, Statement
from budget.circuit.qasm_expr import Number, evaluate, line_of
from budget.circuit.qasm_parse import parse_tree, qasm_version
from budget.circuit.qasm_registers import Registers
from budget.circuit.source import read_text
from budget.graph import layer_program
from budget.problems import CircuitSyntaxError, place

STANDARD_INCLUDES = ("qelib1.inc", "stdgates.inc")
_BUILTIN_NAMES = {"U": "u", "CX": "cx"}
_UNSUPPORTED = {
    "QuantumReset": "reset (mid-circuit reset is not supported)",
    "BranchingStatement": "classically controlled operation 'if' (the tool follows one fixed gate sequence)",
    "WhileLoop": "'while' loop (its iteration count is not known before running; use a for loop over an integer range)",
    "DelayInstruction": "delay (idle time is not modelled as an instruction; layers set the timing)",
    "Box": "box",
    "SubroutineDefinition": "subroutine definition 'def'",
    "ExternDeclaration": "extern declaration",
    "CalibrationDefinition": "defcal",
    "CalibrationStatement": "cal block",
    "CalibrationGrammarDeclaration": "defcalgrammar",
    "ClassicalAssignment": "classical assignment (only constant values are supported)",
    "AliasStatement": "alias 'let'",
    "IODeclaration": "input/output declaration (give the value in the file instead)",
    "Pragma": "pragma",
    "ReturnStatement": "return",
    "BreakStatement": "break",
    "ContinueStatement": "continue",
    "EndStatement": "end",
    "ExpressionStatement": "expression statement",
    "SwitchStatement": "switch",
}


@dataclass(frozen=True)
class _GateDef:
    params: tuple[str, ...]
    qubits: tuple[str, ...]
    body: tuple[ast.QuantumStatement, ...]
    line: int | None


def read_qasm(path: str | Path) -> StructuredCircuit:
    """Read an OpenQASM 2.0 or 3 file; the ``OPENQASM`` header decides the version (3 if absent).

    Raises:
        InputError: the file does not exist or cannot be read.
        CircuitSyntaxError: ``file:line: ...`` naming the construct and the rule it breaks.
    """
    return parse_qasm(read_text(path), source=str(Path(path)))


def parse_qasm(text: str, *, source: str = "<string>") -> StructuredCircuit:
    """Read OpenQASM 2.0 or 3 text (see :func:`read_qasm`); ``source`` names it in messages.

    >>> c = parse_qasm('OPENQASM 3; include "stdgates.inc"; qubit[2] q; '
    ...                'for int i in [1:1000] { h q[0]; cx q[0], q[1]; }')
    >>> c.qubits, c.executed_counts()
    (('q[0]', 'q[1]'), (2000, 2000))
    """
    version = qasm_version(text) or 3
    if version not in (2, 3):
        raise CircuitSyntaxError(f"{source}: OPENQASM {version}: only versions 2 and 3 are supported")
    reader = _Reader(source, text.splitlines())
    program = reader.statements(parse_tree(text, source=source, version=version).statements, in_loop=False)
    return layer_program(program, qubits=reader.regs.names, measured=reader.measured, source=source)


class _Reader:
    """Interpreter state: registers, gate definitions, constants and measured qubits."""

    def __init__(self, source: str, lines: list[str]) -> None:
        self.source = source
        self.gates: dict[str, _GateDef] = {}
        self.consts: dict[str, Number] = {}
        self.regs = Registers(source, lines, self.consts)
        self.measured: dict[int, int | None] = {}

    # -- helpers -------------------------------------------------------------------------------
    def error(self, node: ast.QASMNode | int | None, what: str) -> CircuitSyntaxError:
        line = node if isinstance(node, int) or node is None else line_of(node)
        return CircuitSyntaxError(f"{place(self.source, line)}: {what}")

    def value(self, expr: ast.Expression, env: dict[str, Number]) -> Number:
        return evaluate(expr, env, source=self.source)


    # -- statements ----------------------------------------------------------------------------
    def statements(self, stmts: list[ast.Statement], *, in_loop: bool) -> list[Statement]:
        out: list[Statement] = []
        for st in stmts:
            self.statement(st, out, in_loop)
        return out

    def statement(self, st: ast.Statement, out: list[Statement], in_loop: bool) -> None:
        kind = type(st).__name__
        if isinstance(st, ast.Include):
            if st.filename not in STANDARD_INCLUDES:
                raise self.error(st, f"include \"{st.filename}\": only {' and '.join(STANDARD_INCLUDES)} are supported")
        elif isinstance(st, ast.QubitDeclaration):
            if in_loop:
                raise self.error(st, "qubit declaration inside a loop is not supported")
            size = None if st.size is None else self.regs.integer(st.size, f"size of register {st.qubit.name}")
            self.regs.declare(st.qubit.name, size, st)
        elif isinstance(st, (ast.ClassicalDeclaration, ast.ConstantDeclaration)):
            self.classical(st, out, in_loop)
        elif isinstance(st, ast.QuantumGateDefinition):
            self.define(st)
        elif isinstance(st, ast.QuantumGate):
            self.call(st, out)
        elif isinstance(st, ast.QuantumPhase):
            if st.modifiers:
                raise self.error(st, "gate modifiers on gphase are not supported")
            # global phase: no observable effect, ignored
        elif isinstance(st, ast.QuantumBarrier):
            qs = [q for operand in st.qubits for q in self.regs.operand(operand)[0]] if st.qubits else []
            out.append(Barrier(tuple(qs), line_of(st)))
        elif isinstance(st, ast.QuantumMeasurementStatement):
            self.measure(st.measure, st, in_loop)
        elif isinstance(st, ast.ForInLoop):
            self.loop(st, out)
        else:
            construct = _UNSUPPORTED.get(kind, kind)
            raise self.error(st, f"{construct} is not supported by the circuit reader")

    def classical(self, st: ast.ClassicalDeclaration | ast.ConstantDeclaration, out, in_loop: bool) -> None:
        init = st.init_expression
        if isinstance(init, ast.QuantumMeasurement):
            self.measure(init, st, in_loop)
        elif init is not None and not isinstance(st.type, ast.BitType):
            self.consts[st.identifier.name] = self.value(init, self.consts)

    def define(self, st: ast.QuantumGateDefinition) -> None:
        name = st.name.name
        if name in self.gates:
            raise self.error(st, f"gate '{name}' is defined twice (first at line {self.gates[name].line})")
        self.gates[name] = _GateDef(
            tuple(a.name for a in st.arguments), tuple(q.name for q in st.qubits), tuple(st.body), line_of(st)
        )

    def measure(self, meas: ast.QuantumMeasurement, st: ast.QASMNode, in_loop: bool) -> None:
        if in_loop:
            raise self.error(st, "measure inside a for loop is a mid-circuit measurement, which is not supported")
        for q in self.regs.operand(meas.qubit)[0]:
            self.measured.setdefault(q, line_of(st))

    # -- gates ---------------------------------------------------------------------------------
    def call(self, st: ast.QuantumGate, out: list[Statement]) -> None:
        if st.modifiers:
            mods = " @ ".join(m.modifier.name for m in st.modifiers)
            raise self.error(st, f"gate modifier '{mods} @' on {st.name.name} is not supported")
        if st.duration is not None:
            raise self.error(st, f"a duration on gate {st.name.name} is not supported")
        params = tuple(float(self.value(a, self.consts)) for a in st.arguments)
        for qubits in self.regs.broadcast(st):
            self.apply(st.name.name, params, qubits, line_of(st), out, ())

    def apply(self, name: str, params: tuple[float, ...], qubits: tuple[int, ...], line, out, stack) -> None:
        if len(set(qubits)) != len(qubits):
            names = ", ".join(self.regs.names[q] for q in qubits)
            raise self.error(line, f"gate {name} on {names}: a qubit appears twice")
        if name in self.gates:
            self.inline(name, params, qubits, line, out, stack)
            return
        canon = _BUILTIN_NAMES.get(name, ALIASES.get(name, name))
        if name == "u0" and len(params) == 1:  # qelib1's u0(γ) is an identity of duration γ
            canon, params = "id", ()
        if canon in GATES:
            spec = GATES[canon]
            self.arity(name, params, qubits, spec.num_params, spec.num_qubits, line)
            op = Operation(canon, qubits, params, line=line)
            self.emit(op, out)
        elif canon in DECOMPOSITIONS:
            d = DECOMPOSITIONS[canon]
            self.arity(name, params, qubits, d.num_params, d.num_qubits, line)
            for gate, angles, where in expand(canon, params, qubits):
                self.emit(Operation(gate, where, angles, line=line), out)
        else:
            raise self.error(line, f"unknown gate '{name}' (not defined in the file, not in the gate table)")

    def arity(self, name, params, qubits, num_params: int, num_qubits: int, line) -> None:
        if len(params) != num_params or len(qubits) != num_qubits:
            raise self.error(
                line,
                f"gate {name} takes {num_params} angle(s) and {num_qubits} qubit(s), "
                f"got {len(params)} and {len(qubits)}",
            )

    def emit(self, op: Operation, out: list[Statement]) -> None:
        done = [q for q in op.qubits if q in self.measured]
        if done:
            q = done[0]
            raise self.error(
                op.line,
                f"gate {op.gate} on {self.regs.names[q]} after its measurement at line {self.measured[q]}: "
                "mid-circuit measurement is not supported (measure only at the end)",
            )
        out.append(op)

    def inline(self, name: str, params, qubits, line, out, stack: tuple[str, ...]) -> None:
        g = self.gates[name]
        if name in stack:
            raise self.error(g.line, f"gate '{name}' is defined in terms of itself ({' -> '.join(stack + (name,))})")
        self.arity(name, params, qubits, len(g.params), len(g.qubits), line)
        env = {**self.consts, **dict(zip(g.params, params))}
        local = dict(zip(g.qubits, qubits))
        for st in g.body:
            if isinstance(st, ast.QuantumPhase):
                if st.modifiers:
                    raise self.error(st, "gate modifiers on gphase are not supported")
                continue
            if isinstance(st, ast.QuantumBarrier):
                out.append(Barrier(tuple(self.local_qubits(name, st, local)), line))
                continue
            if not isinstance(st, ast.QuantumGate):
                raise self.error(st, f"{type(st).__name__} inside gate '{name}' is not supported")
            if st.modifiers:
                raise self.error(st, f"gate modifier on {st.name.name} inside gate '{name}' is not supported")
            angles = tuple(float(self.value(a, env)) for a in st.arguments)
            self.apply(st.name.name, angles, self.local_qubits(name, st, local), line, out, stack + (name,))

    def local_qubits(self, gate: str, st: ast.QuantumStatement, local: dict[str, int]) -> tuple[int, ...]:
        """Operands inside a gate definition: plain names of the gate's qubit arguments."""
        out = []
        for q in st.qubits:
            if not isinstance(q, ast.Identifier) or q.name not in local:
                raise self.error(st, f"inside gate '{gate}', operands must be its qubit arguments ({', '.join(local)})")
            out.append(local[q.name])
        return tuple(out)

    # -- loops ---------------------------------------------------------------------------------
    def loop(self, st: ast.ForInLoop, out: list[Statement]) -> None:
        var = st.identifier.name
        use = _first_use(st.block, var)
        if use is not None:
            raise self.error(
                line_of(use) or line_of(st),
                f"loop variable '{var}' of the for loop at line {line_of(st)} is used in its body: "
                "loops are kept as repeated blocks, so every iteration must be identical",
            )
        count = self.loop_count(st)
        body = self.statements(st.block, in_loop=True)
        out.append(Loop(tuple(body), count, line_of(st)))

    def loop_count(self, st: ast.ForInLoop) -> int:
        it = st.set_declaration
        if isinstance(it, ast.DiscreteSet):
            return len(it.values)
        if isinstance(it, ast.RangeDefinition):
            self.regs.check_range(it)
            if it.start is None or it.end is None:
                raise self.error(st, "for loop range needs a start and an end, e.g. [0:9]")
            start = self.regs.integer(it.start, "for loop range start")
            end = self.regs.integer(it.end, "for loop range end")
            step = 1 if it.step is None else self.regs.integer(it.step, "for loop range step")
            if step == 0:
                raise self.error(st, "for loop range step is 0")
            return len(range(start, end + (1 if step > 0 else -1), step))
        raise self.error(st, "for loop over something other than an integer range or {set} is not supported")


def _first_use(block: list[ast.Statement], name: str) -> ast.Identifier | None:
    """The first identifier ``name`` in a loop body (gate names excluded), or None."""

    def walk(node) -> ast.Identifier | None:
        if isinstance(node, list):
            for item in node:
                found = walk(item)
                if found is not None:
                    return found
            return None
        if isinstance(node, ast.Identifier):
            return node if node.name == name else None
        if isinstance(node, ast.QASMNode):
            for f in dataclasses.fields(node):
                if isinstance(node, ast.QuantumGate) and f.name == "name":
                    continue
                found = walk(getattr(node, f.name))
                if found is not None:
                    return found
        return None

    return walk(block)
