"""A new user's faults, round 4: each reproduction as a test.

Sources: stim's circuit generator (Gidney, Quantum 5, 497 (2021)) declares the detectors and the
logical observable of its memory experiments (the reference for the detector space); cirq's
density-matrix simulator for spot checks of numbers.
"""

from __future__ import annotations

import re

import pytest
import stim

from budget.analysis.detectors import infer_checks
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel

from test_detectors_infer import noisy_from_stim, rank, stim_annotations


# --- XYZ color code: the final stabilizer parities were called logical observables ---------------------

@pytest.mark.parametrize("distance, rounds", [(3, 2), (3, 3), (3, 4), (5, 4), (3, 5)])
def test_color_code_detectors_are_stims(distance, rounds):
    """The check basis of stim's XYZ color code cycles from round to round, so the data's final
    parity closes with two earlier rounds of the check (not its last outcome) and a check equals
    the product of its two previous outcomes. The inference called the final parities logical
    observables (4 observables for distance 3, 4 rounds: P(some detector fires) left out the last
    round). Now the space is stim's, with one observable; up to 4 rounds the very same detectors."""
    gen = stim.Circuit.generated("color_code:memory_xyz", distance=distance, rounds=rounds)
    checks = infer_checks(noisy_from_stim(gen))
    dets, obs = stim_annotations(gen)
    ours = [set(d.measurements) for d in checks.detectors]
    assert len(checks.observables) == len(obs) == 1
    assert len(ours) == len(dets)
    assert rank(ours) == rank(ours + [set(d) for d in dets]) == len(dets)
    assert rank(ours + [set(o) for o in checks.observables]) == rank(ours + [set(d) for d in dets] + [set(obs[0])])
    if rounds <= 4:
        assert {frozenset(d.measurements) for d in checks.detectors} == set(dets)


# --- stim's default OpenQASM 3 (detectors and observables as parity assignments) was refused ----------

@pytest.mark.parametrize("code", ["repetition_code:memory", "surface_code:rotated_memory_z", "color_code:memory_xyz"])
def test_stims_default_qasm3_reads_like_the_stripped_one(code):
    """`to_qasm(open_qasm_version=3)` writes `dets[0] = rec[0] ^ 0;` and
    `obs[0] = obs[0] ^ rec[8] ^ 0;`; the reader refused line 27 as a classical assignment. A parity
    changes no qubit: the circuit must be the one read from stim's output without them."""
    gen = stim.Circuit.generated(code, distance=3, rounds=3)
    full = parse_qasm(gen.to_qasm(open_qasm_version=3), source="full.qasm")
    bare = parse_qasm(gen.to_qasm(open_qasm_version=3, skip_dets_and_obs=True), source="bare.qasm")
    assert full.executed_counts() == bare.executed_counts()
    assert _shape(full) == _shape(bare)
    checks = infer_checks(attach(full, ErrorModel.from_dict({})))
    dets, obs = stim_annotations(gen)
    assert {frozenset(d.measurements) for d in checks.detectors} == set(dets)


def _shape(circuit) -> str:
    """The circuit tree without line numbers."""
    return re.sub(r"line=\d+", "line=?", repr(circuit.body))


PARITY_HEAD = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nbit[2] c;\nbit d;\n'


def test_parity_assignments_and_their_limits():
    ok = parse_qasm(PARITY_HEAD + "c[0] = measure q[0];\nd = c[0] ^ 1;\nd ^= c[1];\nx q[1];\n")
    assert _shape(ok) == _shape(parse_qasm(PARITY_HEAD + "c[0] = measure q[0];\nx q[1];\n"))
    with pytest.raises(Exception, match=r"<string>:8: condition on 'd', which the parity assignment at line 7 computed"):
        parse_qasm(PARITY_HEAD + "c[0] = measure q[0];\nd = c[0] ^ c[1];\nif (d) x q[1];\n")
    # measured again: a condition may read it
    parse_qasm(PARITY_HEAD + "d = c[0] ^ c[1];\nd = measure q[0];\nif (d) x q[1];\n")
    with pytest.raises(Exception, match=r"<string>:6: this classical assignment \(supported: .*parity of bits"):
        parse_qasm(PARITY_HEAD + "d = c[0] & c[1];\nx q[0];\n")
    with pytest.raises(Exception, match=r"<string>:6: a parity reads single bits"):
        parse_qasm(PARITY_HEAD + "d = c ^ 1;\nx q[0];\n")
    with pytest.raises(Exception, match=r"<string>:6: a parity is written into one bit"):
        parse_qasm(PARITY_HEAD + "c = d ^ 1;\nx q[0];\n")


# --- a depth curve re-diagonalised the same block at every point (85 s for a 4-qubit QFT) --------------

def test_channel_power_decomposes_each_block_once(monkeypatch):
    """`budget depth qft_n4.qasm --max-cycles 100` spent 27 of 37 s in 26 eig calls of one and the
    same 256 x 256 block. Powers must equal repeated multiplication (numpy.linalg.matrix_power) and
    the block must be decomposed once for all counts."""
    import numpy as np

    from budget.engines.exact import power

    # a Pauli transfer matrix of amplitude damping (γ = 0.02) after a small x rotation: CPTP
    g, t = 0.02, 0.05
    damp = np.array([[1, 0, 0, 0], [0, np.sqrt(1 - g), 0, 0], [0, 0, np.sqrt(1 - g), 0], [g, 0, 0, 1 - g]])
    rot = np.array([[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, np.cos(t), -np.sin(t)], [0, 0, np.sin(t), np.cos(t)]])
    block = damp @ rot
    calls = []
    real_eig = np.linalg.eig
    monkeypatch.setattr(np.linalg, "eig", lambda m: calls.append(1) or real_eig(m))
    for n in (1, 9, 100, 1000):
        got, method = power.channel_power(block, n)
        assert method == "eig"
        assert np.allclose(got, np.linalg.matrix_power(block, n), atol=1e-12)
    assert len(calls) == 1


# --- "exact, clifford, generators does not fit" ----------------------------------------------------------

def test_engine_reason_agrees_in_number():
    """Three engines that do not fit were listed with a singular verb; one keeps it."""
    from budget.engines.door import choose

    wide = 'OPENQASM 3;\ninclude "stdgates.inc";\nqubit[16] q;\nt q[0];\n' + "".join(
        f"cx q[{i}], q[{i + 1}];\n" for i in range(15))
    noisy = attach(parse_qasm(wide), ErrorModel.from_dict({"gates": {"cx": {"cphase": 0.01}}}))
    assert choose(noisy, "process", "auto").reason.endswith("exact, clifford, generators do not fit")
    ghz = 'OPENQASM 3;\ninclude "stdgates.inc";\nqubit[40] q;\nh q[0];\n' + "".join(
        f"cx q[{i}], q[{i + 1}];\n" for i in range(39))
    noisy = attach(parse_qasm(ghz), ErrorModel.from_dict({"gates": {"cx": {"cphase": 0.01}}}))
    assert choose(noisy, "process", "auto").reason.endswith("; exact does not fit")


# --- beyond range: the family shares were withheld, the per-operation shares and the qubit map not ------

def test_beyond_range_withholds_every_first_order_split(tmp_path):
    """ghz_n127 under the public model: the family table showed '—' but the table under it listed
    operation shares and a 'marginal process infidelity per qubit' of 8.3 (an infidelity above 1).
    Every first-order split is now left out together, with one line saying why."""
    from rich.console import Console

    from budget import analyze
    from budget.report.terminal import render_budget

    ghz = tmp_path / "ghz.qasm"
    ghz.write_text('OPENQASM 3;\ninclude "stdgates.inc";\nqubit[30] q;\nh q[0];\n'
                   + "".join(f"cx q[{i}], q[{i + 1}];\n" for i in range(29)))
    model = {"qubits": {"t1_us": 2.0}, "gates": {"cx": {"duration_ns": 200.0, "cphase": 0.01}}}
    result = analyze(str(ghz), model)
    assert result.actual is None and result.details.landing is not None
    console = Console(width=250, color_system=None)
    with console.capture() as cap:
        console.print(render_budget(result))
    text = cap.get()
    assert "top operations" not in text and "where the error lands" not in text
    assert text.count("left out: the error is beyond the first-order range") == 1


# --- reader: a loop of 10**29 iterations crashed (OverflowError), rx(1e400) ran with a NaN matrix ------

@pytest.mark.parametrize("line, message", [
    ("for int i in [0:99999999999999999999999999999] { h q[0]; }",
     r"c.qasm:4: for loop range \[0:99999999999999999999999999999\] runs 100,000,000,000,000,000,000,000,000,000 "
     r"times: at most 10\*\*18 iterations per loop"),
    ("rx(1e400) q[0];", r"c.qasm:4: the expression evaluates to inf: expected a finite number"),
    ("rx(1e308 * 10) q[0];", r"c.qasm:4: the expression evaluates to inf: expected a finite number"),
])
def test_reader_refuses_overflowing_numbers_in_one_line(tmp_path, line, message):
    from typer.testing import CliRunner

    from budget.cli import app

    circ, model, out = tmp_path / "c.qasm", tmp_path / "m.toml", tmp_path / "o.json"
    circ.write_text(f'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\n{line}\n')
    model.write_text("[gates.h]\noverrotation = 0.01\n[gates.rx]\noverrotation = 0.01\n")
    res = CliRunner().invoke(app, ["analyze", str(circ), "-e", str(model), "--json", str(out)], env={"COLUMNS": "400"})
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert res.exit_code == 2 and not out.exists() and len(lines) == 1, res.output
    assert re.search(message, lines[0]), lines[0]
    assert "Traceback" not in res.output and "RuntimeWarning" not in res.output


def test_loop_counts_by_arithmetic_match_range():
    """The count is computed as (end - start) // step + 1 (len(range) overflows past 2**63): it must
    equal Python's range length on every sign combination."""
    for start, end, step in [(0, 9, 1), (5, 1, -1), (0, 10, 3), (5, -1, -2), (0, 0, 1), (3, 3, -1), (-4, 7, 5)]:
        text = f'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit q;\nfor int i in [{start}:{step}:{end}] {{ x q; }}\n'
        assert parse_qasm(text).executed_counts()[0] == len(range(start, end + (1 if step > 0 else -1), step))


@pytest.mark.parametrize("value, message", [
    ("Infinity", r"c.json: moment 0: operation Rx\(infπ\)\(q\(0\)\): its matrix cannot be computed"),
    ("NaN", r"c.json: moment 0: operation Rx\(nanπ\)\(q\(0\)\): its matrix has entries that are not finite"),
])
def test_cirq_reader_refuses_non_finite_angles(tmp_path, value, message):
    """The same fault in the cirq JSON reader: Rx(NaN) ran as a NaN matrix, Rx(Infinity) raised
    ZeroDivisionError from inside cirq (a traceback)."""
    import cirq

    from budget.circuit.load import load_circuit
    from budget.problems import InputError

    path = tmp_path / "c.json"
    path.write_text(cirq.to_json(cirq.Circuit(cirq.rx(0.125).on(cirq.LineQubit(0)))).replace("0.125", value))
    with pytest.raises(InputError, match=message):
        load_circuit(path)


def test_cirq_repetitions_beyond_the_limit(tmp_path):
    import cirq

    from budget.circuit.load import load_circuit
    from budget.problems import InputError

    q = cirq.LineQubit(0)
    path = tmp_path / "r.json"
    path.write_text(cirq.to_json(cirq.Circuit(cirq.CircuitOperation(cirq.FrozenCircuit(cirq.X(q)), repetitions=10**20))))
    with pytest.raises(InputError, match=r"repetitions = 100,000,000,000,000,000,000: at most 10\*\*18"):
        load_circuit(path)


# --- "the incoherent floor 0.0541 alone exceeds the target 0.054 ... T1 80 -> 78 µs" ---------------------

def test_floor_near_the_target_is_judged_on_the_accurate_engine(tmp_path):
    """The leading-order floor (a sum of the gates' incoherent errors) exceeded the target while the
    exact floor did not: `tolerances` said no calibration could meet the target and its remedy asked
    for a *shorter* T1. 60 depolarized x gates of average infidelity r = 1e-3: the depolarizing
    parameter composes as λ^N, 1 - F_pro = (3/4)(1 - λ^N) with λ = 1 - 2r for one
    qubit (Nielsen & Chuang (2000) §8.3; Horodecki et al., PRA 60, 1888 (1999)): 0.08498, while
    the sum is 60 · (3/2) r = 0.09. A target of 0.088 is met with tolerances to spare."""
    import json
    import math

    from typer.testing import CliRunner

    from budget.cli import app

    circ, model, out = tmp_path / "c.qasm", tmp_path / "m.toml", tmp_path / "t.json"
    circ.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit q;\nfor int i in [1:60] { x q; }\n')
    model.write_text("[gates.x]\noverrotation = 0.0\navg_infidelity = 1e-3\n")
    res = CliRunner().invoke(app, ["tolerances", str(circ), "-e", str(model), "-t", "0.088", "--json", str(out)],
                             env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    exact = 0.75 * (1 - (1 - 2e-3) ** 60)
    assert math.isclose(data["incoherent_floor"], exact, rel_tol=1e-9)
    assert data["coherent_budget"] == pytest.approx(0.088 - exact)
    assert "exceeds the target" not in res.output and "leading-order incoherent floor 0.09 reaches" in res.output


# --- small wording faults: [gates.U] refused for a circuit that uses U; "1 operations in 1 layers" -----

def test_builtin_names_in_the_model_and_singular_counts(tmp_path):
    """stim's OpenQASM 3 writes `U(...)`; the model refused `[gates.U]` ("not a gate in the gate
    table") while the reader mapped U to u. Both now name the same gate, once."""
    from rich.console import Console

    from budget import analyze
    from budget.problems import InputError
    from budget.report.terminal import render_budget

    circ = tmp_path / "u.qasm"
    circ.write_text("OPENQASM 3.0;\nqubit q;\nU(pi/2, 0, pi) q;\n")
    result = analyze(str(circ), {"gates": {"U": {"overrotation": 0.01}}})
    assert [f.name for f in result.families] == ["u"] and result.actual > 0
    with pytest.raises(InputError, match="gate u is already described by gates.U"):
        analyze(str(circ), {"gates": {"U": {"overrotation": 0.01}, "u": {"overrotation": 0.01}}})
    console = Console(width=200, color_system=None)
    with console.capture() as cap:
        console.print(render_budget(result))
    assert "1 qubit, 1 operation in 1 layer " in cap.get()


def test_zero_error_model_prints_zero_in_compensate_like_analyze(tmp_path):
    """An error model with nothing in it (an x with over-rotation 0): `compensate` printed
    "0.000e+00" where `analyze` prints "0" (exact zero: no error, fact of the model)."""
    from typer.testing import CliRunner

    from budget.cli import app

    circ, model = tmp_path / "z.qasm", tmp_path / "z.toml"
    circ.write_text('OPENQASM 3;\ninclude "stdgates.inc";\nqubit[2] q;\nfor int i in [0:4] { x q[0]; cx q[0], q[1]; }\n')
    model.write_text("[gates.x]\noverrotation = 0.0\n")
    res = CliRunner().invoke(app, ["compensate", str(circ), "-e", str(model)], env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    assert "e+00" not in res.output and re.search(r"before\s*│\s*0\s*│\s*0\s*│", res.output), res.output
