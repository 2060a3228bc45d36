"""OpenQASM text to the reference syntax tree, with syntax errors that name ``file:line``.

Both OpenQASM 2.0 and 3 are parsed by the ``openqasm3`` reference parser (its grammar accepts
OpenQASM 2 programs too). The package's own ``openqasm3.parse`` raises an error without a message,
so this module drives the same ANTLR lexer and parser with a listener that stops at the first
syntax error and reports its line and the offending text.

Two rewrites happen before parsing, both keep line numbers: an untyped loop header
``for i in ...`` (allowed by earlier drafts of OpenQASM 3) becomes ``for int i in ...``; and in
OpenQASM 2, where ``^`` is the power operator (binding tighter than unary minus, right
associative), ``^`` becomes OpenQASM 3's ``**``, which has exactly that precedence (in OpenQASM 3
``^`` is a bitwise XOR).
"""

from __future__ import annotations

import re

from antlr4 import CommonTokenStream, InputStream
from antlr4.atn.PredictionMode import PredictionMode
from antlr4.error.ErrorListener import ErrorListener
from antlr4.error.Errors import ParseCancellationException
from antlr4.error.ErrorStrategy import BailErrorStrategy
from openqasm3 import ast
from openqasm3._antlr.qasm3Lexer import qasm3Lexer
from openqasm3._antlr.qasm3Parser import qasm3Parser
from openqasm3.parser import QASMNodeVisitor

from budget.problems import CircuitSyntaxError, place

_UNTYPED_FOR = re.compile(r"\bfor(\s+)([A-Za-z_]\w*)(\s+)in\b")
_VERSION = re.compile(r"^\s*OPENQASM\s+(\d+)(?:\.(\d+))?\s*;", re.MULTILINE)
_LOCATED = re.compile(r"^L(\d+):C\d+:\s*(.*)$", re.DOTALL)
_HINTS = {
    "opaque": "opaque gate declarations are not supported: the gate has no definition to expand",
    "for": "a for loop needs the form `for int i in [a:b] { ... }` or `for int i in {a, b} { ... }`",
}


class _Stop(Exception):
    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


class _FirstError(ErrorListener):
    """Stop at the first lexer or parser error, keeping its line and a short message."""

    def syntaxError(self, recognizer, offendingSymbol, line, column, msg, e):  # noqa: N802 (ANTLR API)
        if msg.startswith("missing") and hasattr(recognizer, "getTokenStream"):
            previous = recognizer.getTokenStream().LT(-1)  # "missing ';'" belongs to the line before
            if previous is not None:
                line = previous.line
        raise _Stop(line, _shorten(msg))


def _shorten(msg: str) -> str:
    head, sep, expected = msg.partition(" expecting ")
    if sep and len(expected) > 40:  # ANTLR lists every possible token: keep only the first part
        return head
    return msg


def qasm_version(text: str) -> int | None:
    """Major version from the ``OPENQASM x.y;`` header line, or None when there is none.

    >>> qasm_version("// hi\\nOPENQASM 2.0;\\nqreg q[1];")
    2
    """
    m = _VERSION.search(_strip_comments(text))
    return int(m.group(1)) if m else None


def _strip_comments(text: str) -> str:
    text = re.sub(r"/\*.*?\*/", lambda m: "\n" * m.group(0).count("\n"), text, flags=re.DOTALL)
    return re.sub(r"//[^\n]*", "", text)


def parse_tree(text: str, *, source: str, version: int = 3) -> ast.Program:
    """The reference syntax tree of an OpenQASM 2 or 3 program (``version``: the major version).

    Raises:
        CircuitSyntaxError: ``source:line: syntax error ...`` at the first error.
    """
    if not _strip_comments(text).strip():
        raise CircuitSyntaxError(f"{source}: only comments and blank lines: expected an OpenQASM program")
    fixed = _UNTYPED_FOR.sub(lambda m: f"for{m.group(1)}int {m.group(2)}{m.group(3)}in", text)
    if version == 2:
        fixed = fixed.replace("^", "**")
    try:
        tree = _antlr_tree(fixed, fast=True)  # fast SLL pass; valid programs end here
    except (_Stop, ParseCancellationException):
        try:
            tree = _antlr_tree(fixed, fast=False)  # full LL pass, stops at the first real error
        except _Stop as stop:
            raise CircuitSyntaxError(_message(text, source, stop.line, stop.message)) from None
    try:
        return QASMNodeVisitor().visitProgram(tree)
    except Exception as exc:  # the reference visitor reports semantic slips as "L<line>:C<col>: msg"
        m = _LOCATED.match(str(exc))
        line, msg = (int(m.group(1)), m.group(2)) if m else (None, str(exc) or type(exc).__name__)
        raise CircuitSyntaxError(f"{place(source, line)}: {msg}") from None


def _antlr_tree(text: str, *, fast: bool):
    """ANTLR parse tree. ``fast``: SLL prediction that bails out on any doubt (the usual two-stage
    ANTLR strategy); otherwise full LL prediction with the first-error listener."""
    listener = _FirstError()
    lexer = qasm3Lexer(InputStream(text))
    lexer.removeErrorListeners()
    lexer.addErrorListener(listener)
    parser = qasm3Parser(CommonTokenStream(lexer))
    parser.removeErrorListeners()
    parser.addErrorListener(listener)
    if fast:
        parser._interp.predictionMode = PredictionMode.SLL
        parser._errHandler = BailErrorStrategy()
    return parser.program()


def _message(text: str, source: str, line: int, msg: str) -> str:
    lines = text.splitlines()
    code = lines[line - 1].strip() if 0 < line <= len(lines) else ""
    out = f"{place(source, line)}: syntax error: {msg}"
    if code:
        out += f" in `{code[:80]}`"
    first = re.match(r"[A-Za-z_]\w*", code)
    if first and first.group(0) in _HINTS:
        out += f" ({_HINTS[first.group(0)]})"
    return out
