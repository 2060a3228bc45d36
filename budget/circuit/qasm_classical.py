"""OpenQASM classical bits: registers, measurement targets and ``if`` conditions.

A classical bit is named by a string: ``"c[3]"`` for bit 3 of register ``c``, ``"b"`` for a single
``bit b``. Inside a ``for`` loop, a bit indexed by the loop variable (``c[i]``) is named
``"c[i]"`` and means this iteration's bit, so the loop stays one repeated block. A condition reads
the latest outcome written to each bit; one on a bit that a loop wrote through its variable, read
outside that loop (``c[2]`` after ``for i ... c[i] = measure ...``), would need the loop unrolled and
is refused.

Conditions accepted: ``c == v`` / ``v == c`` on a register (OpenQASM 2's ``if (c == 5)``, bit 0 the
least significant), ``c[k] == 0|1``, ``c[k]``, ``!c[k]``, ``b``, ``!b``, ``c != v`` on a single bit.
"""

from __future__ import annotations

from openqasm3 import ast

from budget.circuit.qasm_expr import Number, evaluate_int, line_of
from budget.problems import CircuitSyntaxError, place


class Bits:
    """Declared classical bits and the loop variables currently in scope.

    Args:
        source: the file name, for messages.
        consts: the program's integer constants (shared with the reader).
    """

    def __init__(self, source: str, consts: dict[str, Number]) -> None:
        self.source = source
        self.consts = consts
        self.table: dict[str, int | None] = {}  # name -> size (None: a single bit)
        self.varying: dict[str, int | None] = {}  # register -> line of the loop that indexes it by its variable
        self.loop_vars: list[str] = []
        self.computed: dict[str, int | None] = {}  # bit -> line of the parity assignment that wrote it last
        self._auto = 0

    def error(self, node: ast.QASMNode | None, what: str) -> CircuitSyntaxError:
        return CircuitSyntaxError(f"{place(self.source, line_of(node))}: {what}")

    def declare(self, name: str, size: int | None, node: ast.QASMNode) -> None:
        if name in self.table:
            raise self.error(node, f"classical bit register '{name}' is declared twice")
        if size is not None and size < 1:
            raise self.error(node, f"bit register '{name}' has size {size}: expected at least 1")
        self.table[name] = size

    def fresh(self) -> str:
        """A bit name for a measurement without a target (never read by a condition)."""
        self._auto += 1
        return f"_m{self._auto}"

    def names(self, node: ast.Expression | None, count: int, where: ast.QASMNode) -> list[str]:
        """The bit names a measurement target gives to ``count`` outcomes (a register broadcasts)."""
        if node is None:
            return [self.fresh() for _ in range(count)]
        bits = self.operand(node, writing=True)
        if len(bits) != count:
            raise self.error(where, f"measurement of {count} qubit(s) into {len(bits)} bit(s): the sizes must match")
        for bit in bits:
            self.computed.pop(bit, None)
        return bits

    def parity(self, st: ast.ClassicalAssignment) -> bool:
        """Read ``d = c[0] ^ c[1] ^ 0;`` or ``d ^= c[2];`` (stim writes its detectors and
        observables so): a parity of recorded bits into one bit. It changes no qubit, so the
        reader keeps only the fact that the bit now holds a computed value (a later condition on
        it is refused). False when the statement is not such a parity.

        Raises:
            CircuitSyntaxError: the target is not one bit.
        """
        if st.op.name not in ("=", "^="):
            return False
        terms: list[ast.Expression] = []
        stack = [st.rvalue]
        while stack:
            node = stack.pop()
            if isinstance(node, ast.BinaryExpression) and node.op.name == "^":
                stack += [node.lhs, node.rhs]
            elif isinstance(node, ast.IntegerLiteral) and node.value in (0, 1) or isinstance(node, ast.BooleanLiteral):
                continue
            else:
                terms.append(node)
        try:
            for term in terms:
                if len(self.operand(term, reading_parity=True)) != 1:
                    raise self.error(term, "a parity reads single bits (c[0] ^ c[1]), not a whole register")
        except CircuitSyntaxError:
            if any(not isinstance(t, (ast.Identifier, ast.IndexExpression, ast.IndexedIdentifier)) for t in terms):
                return False
            raise
        target = self.operand(st.lvalue, writing=True)
        if len(target) != 1:
            raise self.error(st, "a parity is written into one bit (d[0] = c[0] ^ c[1]), not a whole register")
        self.computed[target[0]] = line_of(st)
        return True

    def operand(self, node: ast.Expression, *, writing: bool = False, reading_parity: bool = False) -> list[str]:
        """Bit names of ``c``, ``c[k]``, ``c[i]`` (loop variable) or ``b``; a condition (neither
        ``writing`` nor ``reading_parity``) may not read a bit a parity assignment wrote."""
        bits = self._operand(node, writing=writing or reading_parity)
        if not writing and not reading_parity:
            for bit in bits:
                if bit in self.computed:
                    raise self.error(node, f"condition on '{bit}', which the parity assignment at line "
                                     f"{self.computed[bit]} computed: conditions may read measured bits only")
        return bits

    def _operand(self, node: ast.Expression, *, writing: bool) -> list[str]:
        if isinstance(node, ast.Identifier):
            name, index = node.name, None
        elif isinstance(node, ast.IndexedIdentifier) and len(node.indices) == 1 and len(node.indices[0]) == 1:
            name, index = node.name.name, node.indices[0][0]
        elif isinstance(node, ast.IndexExpression) and isinstance(node.collection, ast.Identifier) and len(node.index) == 1:
            name, index = node.collection.name, node.index[0]
        else:
            raise self.error(node, "classical bit operand must be a bit, a bit register or one indexed bit")
        if name not in self.table:
            raise self.error(node, f"unknown classical bit or register '{name}'")
        size = self.table[name]
        if index is None:
            if not writing:
                self.check_fixed(name, node)
            return [name] if size is None else [f"{name}[{k}]" for k in range(size)]
        if size is None:
            raise self.error(node, f"'{name}' is a single bit and cannot be indexed")
        if isinstance(index, ast.Identifier) and index.name in self.loop_vars:
            if writing:
                self.varying.setdefault(name, line_of(node))
            return [f"{name}[{index.name}]"]
        k = evaluate_int(index, self.consts, source=self.source, what=f"index of {name}")
        if not 0 <= k < size:
            raise self.error(node, f"index {k} is out of range for bit register {name}[{size}]")
        if not writing:
            self.check_fixed(name, node)
        return [f"{name}[{k}]"]

    def check_fixed(self, name: str, node: ast.QASMNode) -> None:
        if name in self.varying:
            raise self.error(
                node,
                f"condition on '{name}', which the loop at line {self.varying[name]} writes through its "
                "variable: only the same iteration's bit (indexed by the variable) can be read",
            )

    def condition(self, expr: ast.Expression) -> tuple[tuple[str, ...], int]:
        """(bits, value) of an ``if`` condition: true when Σ_k bit_k 2^k equals value."""
        negate = False
        if isinstance(expr, ast.UnaryExpression) and expr.op.name == "!":
            negate, expr = True, expr.expression
        if isinstance(expr, ast.BinaryExpression) and expr.op.name in ("==", "!="):
            lhs, rhs = expr.lhs, expr.rhs
            if isinstance(lhs, ast.IntegerLiteral) or isinstance(lhs, ast.BooleanLiteral):
                lhs, rhs = rhs, lhs
            bits = tuple(self.operand(lhs))
            value = self.literal(rhs)
            if expr.op.name == "!=":
                if len(bits) != 1:
                    raise self.error(expr, "'!=' is supported on a single bit only (write 'c == value')")
                value = 1 - value
        elif negate and isinstance(expr, (ast.Identifier, ast.IndexExpression)):
            bits, value, negate = tuple(self.operand(expr)), 0, False
        elif isinstance(expr, (ast.Identifier, ast.IndexExpression)):
            bits, value = tuple(self.operand(expr)), 1
        else:
            raise self.error(expr, "if condition must compare classical bits with an integer (c == 5, c[0], !c[0])")
        if negate:
            raise self.error(expr, "'!' is supported in front of a single bit only")
        if len(bits) > 1 and not isinstance(expr, ast.BinaryExpression):
            raise self.error(expr, "a register as a condition needs a comparison (c == value)")
        if not 0 <= value < 2 ** len(bits):
            raise self.error(expr, f"if condition value {value} does not fit in {len(bits)} bit(s)")
        return bits, value

    def literal(self, node: ast.Expression) -> int:
        if isinstance(node, ast.BooleanLiteral):
            return int(node.value)
        if isinstance(node, ast.BitstringLiteral):
            return int(node.value)
        return evaluate_int(node, self.consts, source=self.source, what="if condition value")
