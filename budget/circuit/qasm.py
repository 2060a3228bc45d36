"""OpenQASM 2.0 and 3 reader: text -> flat program -> :class:`StructuredCircuit`.

The reader walks the reference syntax tree (:mod:`budget.circuit.qasm_parse`), expands gate
calls into table operations (user ``gate`` definitions are inlined with their parameters
substituted; standard gates outside the table are replaced by the sequences of
:mod:`budget.circuit.decompose`), keeps ``for`` loops as loops, reads ``measure``, ``reset`` and
``if`` (classical bits: :mod:`budget.circuit.qasm_classical`) and hands the flat program to
:func:`budget.graph.layer_program`. A circuit whose measurements all come last (no reset, no if)
keeps them as the final readout; otherwise they stay items of the circuit
(:func:`budget.circuit.program.final_readout`). What it accepts and rejects is written down in
docs/circuit-formats.md.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from openqasm3 import ast

from budget.circuit.decompose import DECOMPOSITIONS, expand
from budget.circuit.gates import ALIASES, GATES
from budget.circuit.ir import Measure, Operation, Reset, StructuredCircuit
from budget.circuit.program import MAX_LOOP_COUNT, Barrier, Conditional, Loop, Statement, final_readout
from budget.circuit.qasm_classical import Bits
from budget.circuit.qasm_expr import Number, evaluate, line_of
from budget.circuit.qasm_parse import parse_tree, qasm_version
from budget.circuit.qasm_registers import Registers
from budget.circuit.source import read_text, require_content
from budget.graph import layer_program
from budget.problems import CircuitSyntaxError, place

STANDARD_INCLUDES = ("qelib1.inc", "stdgates.inc")
_UNSUPPORTED = {
    "WhileLoop": "'while' loop (its iteration count is not known before running; use a for loop over an integer range)",
    "DelayInstruction": "delay (idle time is not modelled as an instruction; layers set the timing)",
    "Box": "box",
    "ExternDeclaration": "extern declaration",
    "CalibrationDefinition": "defcal",
    "CalibrationStatement": "cal block",
    "CalibrationGrammarDeclaration": "defcalgrammar",
    "ClassicalAssignment": "this classical assignment (supported: 'c[0] = measure q[0]', a call of a measuring "
                           "subroutine, a parity of bits such as 'd[0] = c[0] ^ c[1] ^ 0')",
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
    program, measured = final_readout(program)
    return require_content(layer_program(program, qubits=reader.regs.names, measured=measured, source=source))


class _Reader:
    """Interpreter state: registers, gate definitions, constants and measured qubits."""

    def __init__(self, source: str, lines: list[str]) -> None:
        self.source = source
        self.gates: dict[str, _GateDef] = {}
        self.consts: dict[str, Number] = {}
        self.regs = Registers(source, lines, self.consts)
        self.bits = Bits(source, self.consts)
        self.subroutines: dict[str, ast.SubroutineDefinition] = {}

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
            self.measure(st.measure, st.target, st, out)
        elif isinstance(st, ast.QuantumReset):
            for q in self.regs.operand(st.qubits)[0]:
                out.append(Reset((q,), line_of(st)))
        elif isinstance(st, ast.BranchingStatement):
            bits, value = self.bits.condition(st.condition)
            then = self.statements(st.if_block, in_loop=in_loop)
            orelse = self.statements(st.else_block, in_loop=in_loop)
            out.append(Conditional(bits, value, tuple(then), tuple(orelse), line_of(st)))
        elif isinstance(st, ast.SubroutineDefinition):
            self.subroutine(st)
        elif isinstance(st, ast.ClassicalAssignment) and st.op.name == "=" and self.measuring(st.rvalue):
            self.assign(st.rvalue, st.lvalue, st, out)
        elif isinstance(st, ast.ClassicalAssignment) and self.bits.parity(st):
            pass  # a parity of recorded bits (stim's detectors and observables): no quantum effect
        elif isinstance(st, ast.ExpressionStatement) and isinstance(st.expression, ast.FunctionCall):
            self.assign(st.expression, None, st, out)
        elif isinstance(st, ast.ForInLoop):
            self.loop(st, out)
        else:
            construct = _UNSUPPORTED.get(kind, kind)
            raise self.error(st, f"{construct} is not supported by the circuit reader")

    def classical(self, st: ast.ClassicalDeclaration | ast.ConstantDeclaration, out, in_loop: bool) -> None:
        init = st.init_expression
        if isinstance(st.type, ast.BitType):
            if in_loop:
                raise self.error(st, "bit declaration inside a loop is not supported (declare it before the loop)")
            size = None if st.type.size is None else self.regs.integer(st.type.size, f"size of {st.identifier.name}")
            self.bits.declare(st.identifier.name, size, st)
        if isinstance(init, ast.QuantumMeasurement):
            self.measure(init, st.identifier, st, out)
        elif init is not None and not isinstance(st.type, ast.BitType):
            self.consts[st.identifier.name] = self.value(init, self.consts)

    def define(self, st: ast.QuantumGateDefinition) -> None:
        name = st.name.name
        if name in self.gates:
            raise self.error(st, f"gate '{name}' is defined twice (first at line {self.gates[name].line})")
        self.gates[name] = _GateDef(
            tuple(a.name for a in st.arguments), tuple(q.name for q in st.qubits), tuple(st.body), line_of(st)
        )

    def measure(self, meas: ast.QuantumMeasurement, target, st: ast.QASMNode, out: list[Statement]) -> None:
        """Projective Z measurement of each named qubit into the target's bits (in order)."""
        qubits = self.regs.operand(meas.qubit)[0]
        for q, bit in zip(qubits, self.bits.names(target, len(qubits), st)):
            out.append(Measure((q,), (bit,), line_of(st)))

    # -- measuring subroutines (stim writes `def mr(qubit q0) -> bit { ... }`) ------------------
    def measuring(self, node: ast.Expression) -> bool:
        return isinstance(node, ast.QuantumMeasurement) or (
            isinstance(node, ast.FunctionCall) and node.name.name in self.subroutines
        )

    def subroutine(self, st: ast.SubroutineDefinition) -> None:
        """Keep a subroutine whose arguments are single qubits; its body is read at each call."""
        name = st.name.name
        for arg in st.arguments:
            if not isinstance(arg, ast.QuantumArgument) or arg.size is not None:
                raise self.error(st, f"subroutine '{name}': only single-qubit arguments are supported")
        if name in self.subroutines or name in self.gates:
            raise self.error(st, f"subroutine '{name}' is defined twice")
        self.subroutines[name] = st

    def assign(self, rvalue: ast.Expression, lvalue, st: ast.QASMNode, out: list[Statement]) -> None:
        """``bit = measure q`` or ``bit = sub(q...)`` with ``sub`` a measuring subroutine."""
        if isinstance(rvalue, ast.QuantumMeasurement):
            self.measure(rvalue, lvalue, st, out)
            return
        if not isinstance(rvalue, ast.FunctionCall) or rvalue.name.name not in self.subroutines:
            raise self.error(st, "only calls of subroutines defined in the file are supported")
        sub = self.subroutines[rvalue.name.name]
        if len(rvalue.arguments) != len(sub.arguments):
            raise self.error(st, f"subroutine '{sub.name.name}' takes {len(sub.arguments)} argument(s), got {len(rvalue.arguments)}")
        local: dict[str, int] = {}
        for arg, given in zip(sub.arguments, rvalue.arguments):
            if isinstance(given, ast.IndexExpression) and isinstance(given.collection, ast.Identifier):
                indexed = ast.IndexedIdentifier(name=given.collection, indices=[given.index])
                indexed.span = given.span
                given = indexed
            qs, many = self.regs.operand(given)
            if many:
                raise self.error(st, f"subroutine '{sub.name.name}': pass single qubits, not a register")
            local[arg.name.name] = qs[0]
        result = None if lvalue is None else self.bits.names(lvalue, 1, st)[0]
        bits: dict[str, str] = {}
        for inner in sub.body:
            self.sub_statement(sub.name.name, inner, local, bits, result, st, out)

    def sub_statement(self, name: str, inner, local, bits: dict[str, str], result, call, out) -> None:
        line = line_of(call)

        def qubit(node) -> int:
            if not isinstance(node, ast.Identifier) or node.name not in local:
                raise self.error(inner, f"inside subroutine '{name}', operands must be its qubit arguments")
            return local[node.name]

        if isinstance(inner, ast.ClassicalDeclaration) and isinstance(inner.type, ast.BitType) and inner.type.size is None:
            bits[inner.identifier.name] = self.bits.fresh()
            if isinstance(inner.init_expression, ast.QuantumMeasurement):
                out.append(Measure((qubit(inner.init_expression.qubit),), (bits[inner.identifier.name],), line))
        elif isinstance(inner, ast.QuantumMeasurementStatement):
            target = inner.target
            if target is not None and not (isinstance(target, ast.Identifier) and target.name in bits):
                raise self.error(inner, f"inside subroutine '{name}', measure into a local bit")
            bit = bits[target.name] if target is not None else self.bits.fresh()
            out.append(Measure((qubit(inner.measure.qubit),), (bit,), line))
        elif isinstance(inner, ast.QuantumReset):
            out.append(Reset((qubit(inner.qubits),), line))
        elif isinstance(inner, ast.QuantumGate) and not inner.modifiers:
            angles = tuple(float(self.value(a, self.consts)) for a in inner.arguments)
            self.apply(inner.name.name, angles, tuple(qubit(q) for q in inner.qubits), line, out, ())
        elif isinstance(inner, ast.ReturnStatement):
            ret = inner.expression
            if not isinstance(ret, ast.Identifier) or ret.name not in bits:
                raise self.error(inner, f"subroutine '{name}' must return one of its local bits")
            if result is not None:
                _rename_last(out, bits[ret.name], result)
        else:
            raise self.error(inner, f"{type(inner).__name__} inside subroutine '{name}' is not supported")

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
        canon = ALIASES.get(name, name)  # U and CX, the built-ins, among them
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
        use = _first_use(st.block, var, set(self.bits.table))
        count = self.loop_count(st)
        if use is not None:  # an index loop (q[j], rz(j*t)): written out, one copy per value
            if count > MAX_UNROLLED:
                raise self.error(
                    line_of(use) or line_of(st),
                    f"loop variable '{var}' of the for loop at line {line_of(st)} is used in its body and the loop runs "
                    f"{count:,} times: loops are kept as repeated blocks, so every iteration must be identical, and a "
                    f"loop whose variable is used is written out only up to {MAX_UNROLLED:,} iterations "
                    "(a classical bit may be indexed by it in a kept loop, as in c[i] = measure q;)",
                )
            self.unroll(st, var, out)
            return
        self.bits.loop_vars.append(var)
        try:
            body = self.statements(st.block, in_loop=True)
        finally:
            self.bits.loop_vars.pop()
        out.append(Loop(tuple(body), count, line_of(st)))

    def unroll(self, st: ast.ForInLoop, var: str, out: list[Statement]) -> None:
        """Write out a loop whose variable appears in its body: the body once per value, with the
        variable bound as an integer constant (OpenQASM 3 for-loop semantics, iteration in order)."""
        saved = self.consts.get(var, _UNSET)
        try:
            for value in self.loop_values(st):
                self.consts[var] = value
                out.extend(self.statements(st.block, in_loop=True))
        finally:
            if saved is _UNSET:
                self.consts.pop(var, None)
            else:
                self.consts[var] = saved

    def loop_values(self, st: ast.ForInLoop):
        """The values a (checked) for loop runs over, in order."""
        it = st.set_declaration
        if isinstance(it, ast.DiscreteSet):
            return [self.regs.integer(v, "for loop value") for v in it.values]
        start, step, end = self.range_parts(it)
        return range(start, end + (1 if step > 0 else -1), step)

    def range_parts(self, it: ast.RangeDefinition) -> tuple[int, int, int]:
        """(start, step, end) of a for-loop range, each an integer."""
        start = self.regs.integer(it.start, "for loop range start")
        end = self.regs.integer(it.end, "for loop range end")
        step = 1 if it.step is None else self.regs.integer(it.step, "for loop range step")
        return start, step, end

    def loop_count(self, st: ast.ForInLoop) -> int:
        it = st.set_declaration
        if isinstance(it, ast.DiscreteSet):
            return len(it.values)
        if isinstance(it, ast.RangeDefinition):
            self.regs.check_range(it)
            if it.start is None or it.end is None:
                raise self.error(st, "for loop range needs a start and an end, e.g. [0:9]")
            start, step, end = self.range_parts(it)
            if step == 0:
                raise self.error(st, "for loop range step is 0")
            count = max(0, (end - start) // step + 1)  # len(range(...)) overflows past 2**63
            if count > MAX_LOOP_COUNT:
                raise self.error(st, f"for loop range [{start}:{'' if it.step is None else f'{step}:'}{end}] runs "
                                 f"{count:,} times: at most 10**18 iterations per loop (as for --cycles)")
            if count == 0:
                raise self.error(
                    st,
                    f"for loop range [{start}:{'' if it.step is None else f'{step}:'}{end}] is empty (0 iterations): the end must be reached "
                    "from the start by the step (a negative step counts down, e.g. [5:-1:1])",
                )
            return count
        raise self.error(st, "for loop over something other than an integer range or {set} is not supported")


_UNSET = object()
MAX_UNROLLED = 1000
"""Iterations at most of a loop written out because its variable is used in its body."""


def _rename_last(out: list[Statement], old: str, new: str) -> None:
    """Give the latest measurement into bit ``old`` the bit name ``new`` (a subroutine's result)."""
    for k in range(len(out) - 1, -1, -1):
        st = out[k]
        if isinstance(st, Measure) and st.bits == (old,):
            out[k] = Measure(st.qubits, (new,), st.line)
            return


def _first_use(block: list[ast.Statement], name: str, registers: set[str] = frozenset()) -> ast.Identifier | None:
    """The first identifier ``name`` in a loop body (gate names excluded), or None; an index of a
    classical bit register (``c[i]``) does not count."""

    def bit_index(node) -> bool:
        if isinstance(node, ast.IndexedIdentifier) and node.name.name in registers:
            return _same_var(node.indices, name)
        if isinstance(node, ast.IndexExpression) and isinstance(node.collection, ast.Identifier):
            return node.collection.name in registers and len(node.index) == 1 and _is_var(node.index[0], name)
        return False

    def walk(node) -> ast.Identifier | None:
        if bit_index(node):
            return None
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


def _is_var(node, name: str) -> bool:
    return isinstance(node, ast.Identifier) and node.name == name


def _same_var(indices, name: str) -> bool:
    return len(indices) == 1 and len(indices[0]) == 1 and _is_var(indices[0][0], name)
