"""OpenQASM 2/3 reader and load_circuit, checked against cirq (its own OpenQASM importer, its gates
and its simulator) and against public benchmark circuits."""

from __future__ import annotations

import re
from pathlib import Path

import cirq
import numpy as np
import pytest

from budget.circuit.decompose import DECOMPOSITIONS, expand
from budget.circuit.ir import Layer, Repeat, StructuredCircuit
from budget.circuit.load import load_circuit
from budget.circuit.qasm import parse_qasm, read_qasm
from budget.problems import CircuitSyntaxError, InputError
from tests.circuit_reference import (
    PUBLIC_QASM,
    assert_same_action,
    assert_same_unitary,
    cirq_from_qasm,
    cirq_name,
    reference_unitary,
    unitary_of,
)

ROOT = Path(__file__).resolve().parents[1]
CCX_OPS = 15  # our Toffoli decomposition: 6 CX + 7 T/T† + 2 H (Nielsen & Chuang Fig. 4.9)
needs_public = pytest.mark.skipif(not PUBLIC_QASM.is_dir(), reason="../shared/qasm-public is absent")


def _ops(c: StructuredCircuit) -> list:
    return [op for layer in c.iter_layers() for op in layer.operations]


# --- public OpenQASM 2 files -------------------------------------------------------------------

_cache: dict[str, tuple[StructuredCircuit, cirq.Circuit]] = {}


def _public(name: str) -> tuple[StructuredCircuit, cirq.Circuit]:
    if name not in _cache:
        path = PUBLIC_QASM / name
        _cache[name] = (read_qasm(path), cirq_from_qasm(path.read_text()))
    return _cache[name]


def _public_names() -> list[str]:
    return sorted(p.name for p in PUBLIC_QASM.glob("*.qasm")) if PUBLIC_QASM.is_dir() else []


@needs_public
@pytest.mark.parametrize("name", _public_names())
def test_public_file_counts_match_cirq(name):
    """Every public file is read; qubits, executed operations, per-qubit operation counts and
    measured qubits agree with cirq's own importer (a Toffoli counts as its 15 operations)."""
    ours, ref = _public(name)
    ref_ops = [op for op in ref.all_operations() if not cirq.is_measurement(op)]
    expected = sum(CCX_OPS if op.gate == cirq.CCX else 1 for op in ref_ops)
    assert ours.num_qubits == len(ref.all_qubits())
    assert ours.executed_counts()[0] == expected
    per_qubit = {q: 0 for q in ref.all_qubits()}
    ccx_share = {k: sum(k in w for _, _, w in expand("ccx", (), (0, 1, 2))) for k in range(3)}
    for op in ref_ops:
        for k, q in enumerate(op.qubits):
            per_qubit[q] += ccx_share[k] if op.gate == cirq.CCX else 1
    ours_per_qubit = {cirq.NamedQubit(cirq_name(n)): 0 for n in ours.qubits}
    for op in _ops(ours):
        for i in op.qubits:
            ours_per_qubit[cirq.NamedQubit(cirq_name(ours.qubits[i]))] += 1
    assert ours_per_qubit == per_qubit
    ref_measured = {q for op in ref.all_operations() if cirq.is_measurement(op) for q in op.qubits}
    assert {cirq.NamedQubit(cirq_name(ours.qubits[i])) for i in ours.measured} == ref_measured


@needs_public
@pytest.mark.parametrize("name", ["qft_n4.qasm", "error_correctiond3_n5.qasm", "basis_trotter_n4.qasm", "qaoa_n6.qasm"])
def test_public_file_unitary_matches_cirq(name):
    ours, ref = _public(name)
    assert_same_unitary(unitary_of(ours), reference_unitary(ref, ours.qubits))


@needs_public
@pytest.mark.parametrize("name", ["adder_n10.qasm", "ising_n10.qasm"])
def test_public_file_action_matches_cirq(name):
    """Ten qubits: compare the output states for random inputs instead of the full unitary."""
    ours, ref = _public(name)
    assert_same_action(ours, ref)


@needs_public
def test_public_qft_barrier_closes_layer_and_names():
    ours, _ = _public("qft_n4.qasm")
    assert ours.qubits == ("q[0]", "q[1]", "q[2]", "q[3]")
    first = ours.body[0]
    assert isinstance(first, Layer) and sorted(op.gate for op in first.operations) == ["x", "x"]
    # line 8 is the barrier: every operation before it sits in an earlier layer
    layers = list(ours.iter_layers())
    last_before = max(k for k, l in enumerate(layers) for op in l.operations if op.line < 8)
    first_after = min(k for k, l in enumerate(layers) for op in l.operations if op.line > 8)
    assert last_before < first_after


@needs_public
def test_public_adder_registers_and_toffoli_lines():
    ours, _ = _public("adder_n10.qasm")
    assert ours.qubits[:3] == ("cin[0]", "a[0]", "a[1]") and ours.qubits[-1] == "cout[0]"
    lines = (PUBLIC_QASM / "adder_n10.qasm").read_text().splitlines()
    call = 1 + next(k for k, text in enumerate(lines) if text.startswith("majority cin[0]"))
    # the user gate "majority" is cx, cx, ccx: 2 + 15 operations, all tagged with the call's line
    assert sum(op.line == call for op in _ops(ours)) == 2 + CCX_OPS


# --- decompositions ----------------------------------------------------------------------------


def _steps_unitary(steps, n: int) -> np.ndarray:
    from budget.circuit.gates import ideal_unitary

    qs = cirq.LineQubit.range(n)
    return cirq.Circuit(cirq.MatrixGate(ideal_unitary(g, p)).on(*(qs[i] for i in w)) for g, p, w in steps).unitary(
        qubit_order=qs
    )


def test_ccx_decomposition_is_exactly_toffoli():
    """Nielsen & Chuang Fig. 4.9: the product of the 15 gates equals the Toffoli matrix exactly
    (not only up to phase), checked against cirq.CCX."""
    steps = expand("ccx", (), (0, 1, 2))
    assert len(steps) == CCX_OPS
    assert sum(g == "cx" for g, _, _ in steps) == 6 and sum(g in ("t", "tdg") for g, _, _ in steps) == 7
    np.testing.assert_allclose(_steps_unitary(steps, 3), cirq.unitary(cirq.CCX), atol=1e-12)


@pytest.mark.parametrize(
    "name, params, gate",
    [
        ("cswap", (), cirq.CSWAP),
        ("ch", (), cirq.ControlledGate(cirq.H)),
        ("crx", (0.37,), cirq.ControlledGate(cirq.rx(0.37))),
        ("cry", (-1.1,), cirq.ControlledGate(cirq.ry(-1.1))),
        ("rxx", (0.8,), cirq.XXPowGate(exponent=0.8 / np.pi, global_shift=-0.5)),  # exp(-iθXX/2)
    ],
)
def test_decompositions_exact_against_cirq(name, params, gate):
    n = DECOMPOSITIONS[name].num_qubits
    np.testing.assert_allclose(_steps_unitary(expand(name, params, tuple(range(n))), n), cirq.unitary(gate), atol=1e-12)


def test_cu3_matches_cirq_importer():
    """cu3 has no cirq gate of its own: compare with cirq's OpenQASM importer up to global phase."""
    text = 'OPENQASM 2.0; include "qelib1.inc"; qreg q[2]; cu3(0.3,-0.4,1.5) q[0],q[1];'
    ours = parse_qasm(text)
    assert_same_unitary(unitary_of(ours), reference_unitary(cirq_from_qasm(text), ours.qubits))


# --- OpenQASM 2 features -----------------------------------------------------------------------

QELIB_MIX = """OPENQASM 2.0;
include "qelib1.inc";
qreg q[3];
creg c[3];
id q[0]; x q[1]; y q[2]; z q[0]; h q[1]; s q[2]; sdg q[0]; t q[1]; tdg q[2];
rx(0.1) q[0]; ry(-0.2) q[1]; rz(0.3) q[2]; u1(0.4) q[0]; u2(0.5,-0.6) q[1]; u3(0.7,0.8,-0.9) q[2];
u(1.1,1.2,1.3) q[0]; p(-1.4) q[1]; sx q[2]; sxdg q[0];
cx q[0],q[1]; cy q[1],q[2]; cz q[2],q[0]; swap q[0],q[2];
cu1(0.25) q[1],q[0]; cp(0.5) q[2],q[1]; crz(0.75) q[0],q[2]; rzz(0.9) q[1],q[2];
ccx q[0],q[1],q[2]; ch q[2],q[0]; crx(0.2) q[0],q[1]; cry(0.3) q[1],q[2]; cu3(0.1,0.2,0.3) q[2],q[1];
cswap q[1],q[0],q[2]; rxx(0.6) q[0],q[2];
U(0.3,0.2,0.1) q[1]; CX q[2],q[0];
measure q -> c;
"""


def test_qelib_gate_set_unitary_matches_cirq_importer():
    ours = parse_qasm(QELIB_MIX, source="mix.qasm")
    assert ours.measured == (0, 1, 2)
    names = {op.gate for op in _ops(ours)}
    assert {"id", "u1", "u2", "u3", "u", "p", "sx", "sxdg", "cu1", "cp", "crz", "rzz", "swap", "cy"} <= names
    assert not names & {"ccx", "ch", "crx", "cry", "cu3", "cswap", "rxx", "U", "CX"}  # all decomposed / mapped
    assert_same_unitary(unitary_of(ours), reference_unitary(cirq_from_qasm(QELIB_MIX), ours.qubits))


def test_gate_definitions_nested_with_parameters():
    text = """OPENQASM 2.0;
include "qelib1.inc";
gate rot(a, b) r { rx(a) r; rz(b*2) r; }
gate pair(t) x, y { rot(t, t/2) x; cx x, y; rot(-t, pi) y; }
qreg q[2];
pair(0.3) q[1], q[0];
"""
    ops = _ops(parse_qasm(text))
    expected = [("rx", (1,)), ("rz", (1,)), ("cx", (1, 0)), ("rx", (0,)), ("rz", (0,))]
    assert [(op.gate, op.qubits) for op in ops] == expected
    np.testing.assert_allclose([p for op in ops for p in op.params], [0.3, 0.3, -0.3, 2 * np.pi], atol=1e-12)
    assert {op.line for op in ops} == {6}


def test_barrier_inside_gate_definition_closes_layer():
    text = 'OPENQASM 2.0; include "qelib1.inc"; gate g a, b { x a; barrier a, b; x b; } qreg q[2]; g q[0], q[1];'
    assert [[op.qubits for op in layer.operations] for layer in parse_qasm(text).body] == [[(0,)], [(1,)]]
    plain = 'OPENQASM 2.0; include "qelib1.inc"; gate g a, b { x a; x b; } qreg q[2]; g q[0], q[1];'
    assert [[op.qubits for op in layer.operations] for layer in parse_qasm(plain).body] == [[(0,), (1,)]]


def test_broadcast_over_registers():
    text = """OPENQASM 2.0;
include "qelib1.inc";
qreg a[3];
qreg b[3];
x b;
cx a, b;
cz a[0], b;
"""
    c = parse_qasm(text)
    ops = _ops(c)
    assert [op.qubits for op in ops if op.gate == "x"] == [(3,), (4,), (5,)]
    assert [op.qubits for op in ops if op.gate == "cx"] == [(0, 3), (1, 4), (2, 5)]
    assert [op.qubits for op in ops if op.gate == "cz"] == [(0, 3), (0, 4), (0, 5)]
    assert c.qubits == ("a[0]", "a[1]", "a[2]", "b[0]", "b[1]", "b[2]")


@pytest.mark.parametrize(
    "expr, value",
    [
        ("pi/4", np.pi / 4),
        ("-pi/4 + 2*sin(pi/6)^2", -np.pi / 4 + 0.5),  # OpenQASM 2: ^ is a power, binding tightest
        ("-2^2", -4.0),
        ("2^3^2", 2.0**9),  # right-associative
        ("sqrt(2)*cos(0)/ln(exp(2))", np.sqrt(2) / 2),
        ("tan(pi/4) - (3 - 1) * 0.5", 0.0),
        ("1/2", 0.5),
    ],
)
def test_parameter_expressions(expr, value):
    text = f'OPENQASM 2.0; include "qelib1.inc"; qreg q[1]; rz({expr}) q[0];'
    (op,) = _ops(parse_qasm(text))
    assert op.params == pytest.approx((value,), abs=1e-12)


def test_measure_forms_and_final_readout():
    text = """OPENQASM 3;
include "stdgates.inc";
qubit[3] q;
qubit anc;
bit[3] c;
bit m;
h q;
c[0] = measure q[0];
measure q[1] -> c[1];
m = measure anc;
"""
    c = parse_qasm(text)
    assert c.qubits == ("q[0]", "q[1]", "q[2]", "anc")
    assert c.measured == (0, 1, 3)


# --- OpenQASM 3 loops --------------------------------------------------------------------------

NESTED = """OPENQASM 3.0;
include "stdgates.inc";
const int outer = 3;
qubit[2] q;
bit[2] c;
gate ent(theta) a, b { cx a, b; rz(theta) b; cx a, b; }
h q[0];
for int i in [0:outer-1] {
  sx q[1];
  for int j in [0:2:5] {
    ent(pi/7) q[0], q[1];
    barrier q;
  }
  gphase(0.3);
  U(0.1, 0.2, 0.3) q[0];
}
c = measure q;
"""


def test_nested_for_loops_become_nested_repeats():
    c = parse_qasm(NESTED, source="nested.qasm")
    assert isinstance(c.body[0], Layer) and isinstance(c.body[1], Repeat)
    outer = c.body[1]
    assert outer.count == 3
    inner = [it for it in outer.body if isinstance(it, Repeat)]
    assert len(inner) == 1 and inner[0].count == 3  # [0:2:5] = 0, 2, 4
    assert c.executed_counts()[0] == 1 + 3 * (1 + 3 * 3 + 1)
    # unrolled unitary equals the same circuit built by hand in cirq
    q0, q1 = cirq.LineQubit.range(2)
    ent = [cirq.CNOT(q0, q1), cirq.rz(np.pi / 7)(q1), cirq.CNOT(q0, q1)]
    u = cirq.MatrixGate(cirq.unitary(cirq.rz(0.2)) @ cirq.unitary(cirq.ry(0.1)) @ cirq.unitary(cirq.rz(0.3)))
    step = [cirq.X(q1) ** 0.5, ent * 3, u(q0)]
    ref = cirq.Circuit([cirq.H(q0)] + step * 3)
    assert_same_unitary(unitary_of(c), ref.unitary(qubit_order=[q0, q1]))


def test_huge_loop_counts_without_unrolling():
    text = """OPENQASM 3;
include "stdgates.inc";
qubit[2] q;
for int i in [1:1000000000] {
  for int j in [0:999] { cz q[0], q[1]; }
  x q[0];
}
"""
    c = parse_qasm(text)
    assert c.executed_counts() == (10**9 * 1001, 10**9 * 1001)
    assert c.body[0].count == 10**9 and c.body[0].body[0].count == 1000


@pytest.mark.parametrize(
    "header, count",
    [("[0:9]", 10), ("[0:2:9]", 5), ("[9:-3:0]", 4), ("{1, 5, 2}", 3), ("[2*n:n*n]", 9)],
)
def test_loop_counts(header, count):
    text = f"OPENQASM 3; include \"stdgates.inc\"; const int n = 4; qubit q; for int i in {header} {{ x q; }}"
    c = parse_qasm(text)
    assert c.executed_counts()[0] == count


def test_untyped_loop_header_accepted():
    c = parse_qasm('OPENQASM 3; include "stdgates.inc"; qubit q;\nfor i in [0:4] { x q; }')
    assert c.body[0].count == 5


def test_physical_qubits():
    c = parse_qasm('OPENQASM 3; include "stdgates.inc"; h $2; cx $2, $0;')
    assert c.qubits == ("$2", "$0") and [op.qubits for op in _ops(c)] == [(0,), (0, 1)]


# --- bad input: every message names file:line and the construct ----------------------------------

BAD = [
    # (text, line, words the message must contain)
    ("OPENQASM 2.0;\nqreg q[1];\ncreg c[1];\nmeasure q[0] -> c[0];\nif (d==1) x q[0];\n", 5, ["unknown classical", "'d'"]),
    ("OPENQASM 2.0;\nqreg q[1];\ncreg c[2];\nmeasure q[0] -> c[0];\nif (c==4) x q[0];\n", 5, ["value 4", "2 bit"]),
    ("OPENQASM 3;\nqubit q;\nbit[2] c;\nif (c) { x q; }\n", 4, ["register", "comparison"]),
    ("OPENQASM 3;\nqubit q;\nbit[2] c;\nc = measure q;\n", 4, ["1 qubit", "2 bit"]),
    (
        "OPENQASM 3;\nqubit q;\nbit[4] c;\nfor int i in [0:3] {\n  c[i] = measure q;\n}\nif (c[2]) { x q; }\n",
        7,
        ["c", "loop at line 5", "variable"],
    ),
    ("OPENQASM 3;\nqubit q;\ndef f(qubit a) -> bit { bit b; x a; return a; }\nbit c;\nc = f(q);\n", 3, ["return", "local bit"]),
    ("OPENQASM 2.0;\nqreg q[1];\nfoo q[0];\n", 3, ["unknown gate", "'foo'"]),
    ("OPENQASM 2.0;\nqreg q[1];\nopaque magic a;\nmagic q[0];\n", 3, ["opaque"]),
    ("OPENQASM 2.0;\nqreg q[2];\nh q[0]\nh q[1];\n", 3, ["syntax error", "';'"]),
    ("OPENQASM 2.0;\nqreg q[2];\nqreg r[3];\ncx q, r;\n", 4, ["cx", "sizes"]),
    ("OPENQASM 2.0;\nqreg q[2];\nrx(0.1, 0.2) q[0];\n", 3, ["rx", "1 angle", "got 2"]),
    ("OPENQASM 2.0;\nqreg q[2];\ncx q[0], q[0];\n", 3, ["cx", "twice"]),
    ("OPENQASM 2.0;\nqreg q[2];\nh q[2];\n", 3, ["index 2", "out of range"]),
    ("OPENQASM 2.0;\nqreg q[2];\nh r[0];\n", 3, ["unknown qubit or register", "'r'"]),
    ("OPENQASM 2.0;\ninclude \"mygates.inc\";\n", 2, ["include", "mygates.inc"]),
    ("OPENQASM 2.0;\nqreg q[1];\nrz(foo) q[0];\n", 3, ["unknown name", "'foo'"]),
    ("OPENQASM 2.0;\nqreg q[1];\nrz(1/0) q[0];\n", 3, ["cannot evaluate"]),
    ("OPENQASM 2.0;\nqreg q[1];\nqreg q[2];\n", 3, ["declared twice"]),
    ("OPENQASM 3;\nqubit[2] q;\nfor int i in [0:2000] {\n  rx(i * 0.1) q[0];\n}\n", 4, ["loop variable 'i'", "line 3", "2,001 times", "1,000"]),
    ("OPENQASM 3;\nqubit[2] q;\nfor int i in [0:3] {\n  h q[i];\n}\n", 4, ["index 2", "out of range"]),
    ("OPENQASM 3;\nqubit q;\nbit c;\nc = measure q;\nwhile (c) { x q; }\n", 5, ["while"]),
    ("OPENQASM 3;\ninclude \"stdgates.inc\";\nqubit[2] q;\nctrl @ x q[0], q[1];\n", 4, ["modifier", "ctrl"]),
    ("OPENQASM 3;\nqubit q;\ndelay[100ns] q;\n", 3, ["delay"]),
    ("OPENQASM 3;\nqubit q;\nint n = 2;\nn = 3;\n", 4, ["classical assignment"]),
    ("OPENQASM 3;\nqubit q;\nfor int i in [0:0:3] { x q; }\n", 3, ["step is 0"]),
    ("OPENQASM 3;\nqubit[4] q;\nh q[::2];\n", 3, ["range '::2'", "start:step:end"]),
    ("OPENQASM 2.0;\ngate g a { g a; }\nqreg q[1];\ng q[0];\n", 2, ["itself"]),
    ("OPENQASM 2.0;\nqreg q[1];\ngate g a { x a; }\ngate g a { y a; }\n", 4, ["defined twice"]),
    ("OPENQASM 2.0;\nqreg q[2];\ngate g a {\n  barrier a[0];\n}\ng q[0];\n", 4, ["inside gate 'g'", "operands"]),
]


@pytest.mark.parametrize("text, line, words", BAD, ids=[b[2][0] for b in BAD])
def test_bad_input_names_file_line_and_construct(tmp_path, text, line, words):
    path = tmp_path / "bad.qasm"
    path.write_text(text)
    with pytest.raises(CircuitSyntaxError) as err:
        load_circuit(path)
    msg = str(err.value)
    assert msg.startswith(f"{path}:{line}: "), msg
    for word in words:
        assert word in msg, msg
    assert "\n" not in msg and "Traceback" not in msg


# --- load_circuit dispatch ---------------------------------------------------------------------


def test_load_dispatch_and_missing_files(tmp_path):
    v2 = tmp_path / "a.qasm"
    v2.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nx q[0];\n')
    v3 = tmp_path / "b.qasm"
    v3.write_text('OPENQASM 3;\ninclude "stdgates.inc";\nqubit q;\nfor int i in [0:1] { x q; }\n')
    assert load_circuit(v2).qubits == ("q[0]",) and load_circuit(str(v2)).source == str(v2)
    assert isinstance(load_circuit(v3).body[0], Repeat)
    with pytest.raises(InputError, match=re.escape(str(tmp_path / "nope.qasm"))):
        load_circuit(tmp_path / "nope.qasm")
    other = tmp_path / "c.txt"
    other.write_text("x")
    with pytest.raises(InputError, match="unknown circuit format '.txt'"):
        load_circuit(other)
    with pytest.raises(TypeError, match="path or a cirq.Circuit"):
        load_circuit(42)
    v4 = tmp_path / "d.qasm"
    v4.write_text("OPENQASM 4.0;\nqubit q;\n")
    with pytest.raises(CircuitSyntaxError, match="OPENQASM 4"):
        load_circuit(v4)


@pytest.mark.parametrize("path", sorted((ROOT / "circuits").glob("*.qasm")), ids=lambda p: p.name)
def test_example_circuits_read(path):
    c = load_circuit(path)
    assert c.num_qubits >= 1 and c.executed_counts()[0] >= 1


def test_docs_examples_read(tmp_path, monkeypatch):
    """The examples of docs/circuit-formats.md run and give what the text says."""
    doc = (ROOT / "docs" / "circuit-formats.md").read_text()
    bell, folded = re.findall(r"```qasm\n(.*?)```", doc, re.DOTALL)
    c = parse_qasm(bell, source="bell")
    assert [op.gate for op in _ops(c)] == ["h", "cx", "rz", "rz"] and c.measured == (0, 1)
    assert parse_qasm(folded, source="folded").executed_counts()[0] == 3 * (1 + 3 * 3 + 1) + 1
    (cirq_example,) = [b for b in re.findall(r"```python\n(.*?)```", doc, re.DOTALL) if "from_cirq" in b]
    monkeypatch.chdir(tmp_path)
    scope: dict = {}
    exec(cirq_example, scope)  # noqa: S102 (our own documentation)
    structured = scope["structured"]
    assert structured.qubits == ("q(0)", "q(1)") and structured.body[1].count == 10**6
    assert load_circuit(tmp_path / "cycle.json").executed_counts() == structured.executed_counts()


def _items_of(text: str):
    """The circuit's items with their line numbers left out (a loop written out and the same gates
    written by hand sit on different lines)."""
    def strip(items):
        out = []
        for it in items:
            if isinstance(it, Layer):
                out.append(("layer", tuple((op.gate, op.qubits, tuple(round(a, 12) for a in op.params)) for op in it.operations)))
            else:
                out.append(("repeat", it.count, tuple(strip(it.body))))
        return out

    return strip(parse_qasm(text).body)


def test_index_loop_is_written_out_as_the_same_gates_by_hand():
    """OpenQASM 3 for-loop semantics (the variable takes each value of the range in order; spec,
    "Looping and branching"): a loop whose variable indexes qubits or enters an angle equals the
    same gates written by hand; an enclosing loop without its variable in use stays a kept block."""
    looped = ("OPENQASM 3;\ninclude \"stdgates.inc\";\nqubit[4] q;\nfor int r in [0:9] {\n"
              "  for int j in [0:2] { cx q[j], q[j+1]; }\n  for int k in {3, 1} { rz(0.1 * k) q[k]; }\n}\n")
    by_hand = ("OPENQASM 3;\ninclude \"stdgates.inc\";\nqubit[4] q;\nfor int r in [0:9] {\n"
               "  cx q[0], q[1];\n  cx q[1], q[2];\n  cx q[2], q[3];\n  rz(0.3) q[3];\n  rz(0.1) q[1];\n}\n")
    assert _items_of(looped) == _items_of(by_hand)
    assert _items_of(looped)[0][:2] == ("repeat", 10)
    counting_down = "OPENQASM 3;\nqubit[3] q;\nconst int j = 7;\nfor int j in [2:-1:0] { x q[j]; }\nrx(0.1 * j) q[0];\n"
    by_hand = "OPENQASM 3;\nqubit[3] q;\nx q[2];\nx q[1];\nx q[0];\nrx(0.7) q[0];\n"
    assert _items_of(counting_down) == _items_of(by_hand)  # the constant j is back after the loop
