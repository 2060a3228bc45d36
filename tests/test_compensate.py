"""`budget compensate`: virtual-Z corrections from the quadratic form, checked with cirq unitaries.

Outside reference: cirq builds the actual circuit (ideal gates, each followed by its error unitary
written with cirq gates, plus the corrections) and the ideal one; process infidelity
1 - |Tr(U_ideal† U)|²/d² (design.md §3). rz(φ) = exp(-iφZ/2) is cirq.rz(φ); a z_phase error φ is
cirq.rz(φ) after the gate; a cphase offset c is diag(1,1,1,e^{ic}) = cirq.CZ**(c/π); an sx
over-rotation δ is cirq.rx(δ) after the gate (docs/error-model.md).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import cirq
import numpy as np
import pytest
from typer.testing import CliRunner

from budget import analyze
from budget.analysis.compensate import compensate, corrected_circuit
from budget.circuit.qasm import parse_qasm
from budget.circuit.qasm_write import to_qasm3
from budget.cli import app
from budget.problems import InputError

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()
N = 10
ZC = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nfor int i in [0:9] {\n  cz q[0], q[1];\n  sx q[1];\n}\n'
MIXED = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nfor int i in [0:9] {\n  cz q[0], q[1];\n  sx q[0];\n  h q[1];\n}\n'


def process_infidelity(actual: cirq.Circuit, ideal: cirq.Circuit, qubits) -> float:
    u, v = cirq.unitary(actual.unfreeze() if hasattr(actual, "unfreeze") else actual), cirq.unitary(ideal)
    d = 2 ** len(qubits)
    return 1 - abs(np.trace(v.conj().T @ u)) ** 2 / d**2


def cirq_pair(z=(0.0, 0.0), cphase=0.0, sx_over=0.0, block_fix=None, end_fix=None, mixed=False):
    """(actual, ideal) cirq circuits of the 10-repetition cycle with the given errors and corrections."""
    q0, q1 = cirq.LineQubit.range(2)
    ideal_cycle = [cirq.CZ(q0, q1)] + ([cirq.X(q0) ** 0.5, cirq.H(q1)] if mixed else [cirq.X(q1) ** 0.5])
    err = [cirq.rz(z[0]).on(q0), cirq.rz(z[1]).on(q1), cirq.CZ(q0, q1) ** (cphase / np.pi)]
    if mixed:
        actual_cycle = [cirq.CZ(q0, q1), *err, cirq.X(q0) ** 0.5, cirq.rx(sx_over).on(q0), cirq.H(q1)]
    else:
        actual_cycle = [cirq.CZ(q0, q1), *err, cirq.X(q1) ** 0.5]
    fix = [cirq.rz(a).on(q) for q, a in zip((q0, q1), block_fix or (0.0, 0.0))]
    end = [cirq.rz(a).on(q) for q, a in zip((q0, q1), end_fix or (0.0, 0.0))]
    actual = cirq.Circuit((actual_cycle + fix) * N + end)
    return actual, cirq.Circuit(ideal_cycle * N), (q0, q1)


def angles(result, where_prefix):
    out = [0.0, 0.0]
    for k in result.corrections:
        if k.where.startswith(where_prefix):
            out[int(k.qubit[2])] += k.angle_rad
    return out


def test_a_lone_z_phase_is_compensated_exactly():
    c = parse_qasm(ZC)
    r = compensate(c, {"gates": {"cz": {"z_phase": [0.02, 0.0]}}}, points="blocks")
    (k,) = r.corrections
    assert (k.qubit, k.angle_rad) == ("q[0]", pytest.approx(-0.02, abs=1e-15))
    before = process_infidelity(*cirq_pair(z=(0.02, 0.0))[:2], (0, 1))
    after = process_infidelity(*cirq_pair(z=(0.02, 0.0), block_fix=(k.angle_rad, 0.0))[:2], (0, 1))
    assert r.before == pytest.approx(before, rel=1e-9)   # sin²(Nφ/2) = sin²(0.1) = 0.00996671
    assert r.before == pytest.approx(math.sin(N * 0.02 / 2) ** 2, rel=1e-9)
    assert r.after < 1e-14 and after < 1e-14  # rounding level


def test_all_points_split_the_same_correction_and_still_cancel():
    r = compensate(parse_qasm(ZC), {"gates": {"cz": {"z_phase": [0.02, 0.0]}}})
    block, end = angles(r, "end of block"), angles(r, "end of circuit")
    assert N * block[0] + end[0] == pytest.approx(-N * 0.02, abs=1e-14)  # total frame change -Nφ
    assert r.after < 1e-14


def test_mixed_case_improves_by_the_predicted_amount():
    model = {"gates": {"cz": {"z_phase": [0.004, 0.003], "cphase": 0.003}, "sx": {"overrotation": 0.002}}}
    r = compensate(parse_qasm(MIXED), model)
    predicted = r.before_first_order - r.after_first_order
    assert predicted > 0.3 * r.before_first_order
    assert r.before - r.after == pytest.approx(predicted, rel=0.03)
    ref_before = process_infidelity(*cirq_pair(z=(0.004, 0.003), cphase=0.003, sx_over=0.002, mixed=True)[:2], (0, 1))
    ref_after = process_infidelity(*cirq_pair(z=(0.004, 0.003), cphase=0.003, sx_over=0.002, mixed=True,
                                              block_fix=angles(r, "end of block"), end_fix=angles(r, "end of circuit"))[:2],
                                   (0, 1))
    assert r.before == pytest.approx(ref_before, rel=1e-8)
    assert r.after == pytest.approx(ref_after, rel=1e-8)


def test_corrected_circuit_reads_back():
    c = parse_qasm(MIXED)
    r = compensate(c, {"gates": {"cz": {"z_phase": [0.004, 0.003]}, "sx": {"overrotation": 0.002}}})
    fixed = corrected_circuit(c, r.corrections)
    back = parse_qasm(to_qasm3(fixed))
    key = lambda ops: sorted((o.gate, o.qubits, o.params) for o in ops)  # noqa: E731
    assert key(back.distinct_operations()) == key(fixed.distinct_operations())
    assert back.executed_counts()[0] == c.executed_counts()[0] + N * 2 + 2 - sum(
        abs(k.angle_rad) <= 1e-15 for k in r.corrections)


def test_no_repeated_block_with_blocks_only():
    c = parse_qasm('OPENQASM 3.0; include "stdgates.inc"; qubit[1] q; x q[0];')
    with pytest.raises(InputError, match="no correction point \\(blocks\\)"):
        compensate(c, {"gates": {"x": {"z_phase": 0.01}}}, points="blocks")


def test_cli_outputs_and_folded_model(tmp_path):
    circuit, model = tmp_path / "zc.qasm", tmp_path / "zc.toml"
    circuit.write_text(ZC)
    model.write_text("# lab model\n[gates.cz]\nz_phase = [0.02, 0.0]\n")
    j, oc, om = tmp_path / "c.json", tmp_path / "fixed.qasm", tmp_path / "fixed.toml"
    res = runner.invoke(app, ["compensate", str(circuit), "-e", str(model), "--points", "blocks", "--json", str(j),
                              "--out-circuit", str(oc), "--out-model", str(om), "--width", "160"])
    assert res.exit_code == 0, res.output
    data = json.loads(j.read_text())
    assert set(data) == {"before", "after", "corrections"}
    assert data["corrections"] == [{"qubit": "q[0]", "where": "end of block 1 (line 5), after each of its 10 repetitions",
                                    "angle_rad": pytest.approx(-0.02)}]
    assert "rz(-0.02" in oc.read_text()
    # the model with the correction folded into cz's z_phase gives the corrected infidelity
    assert "# lab model" in om.read_text()
    assert analyze(circuit, om).actual_infidelity < 1e-14
    # folding is refused when the correction cannot go into one gate
    res = runner.invoke(app, ["compensate", str(circuit), "-e", str(model), "--out-model", str(tmp_path / "no.toml")])
    assert res.exit_code == 2 and "cannot go into a gate's z_phase" in res.output
    assert not (tmp_path / "no.toml").exists()


# ---- echo suggestions ----

def _cirq_ideal(circuit) -> np.ndarray:
    """cirq unitary of the ideal circuit, unrolled (the memory examples use only id and x)."""
    qs = cirq.LineQubit.range(circuit.num_qubits)
    gates = {"id": cirq.I, "x": cirq.X}
    ops = [gates[op.gate].on(*(qs[q] for q in op.qubits)) for layer in circuit.iter_layers() for op in layer.operations]
    return cirq.Circuit(ops).unitary(qubit_order=qs, qubits_that_should_be_present=qs)


def test_echo_on_a_waiting_qubit_cancels_spectator_zz():
    from budget.analysis.echo import echo_suggestions, with_echo
    from budget.circuit.load import load_circuit
    from budget.errors.model import load_model

    circuit = load_circuit(ROOT / "circuits" / "pair_memory_zz.qasm").with_cycles(5)
    model = load_model(ROOT / "circuits" / "fen_pair_zz.toml")
    before = analyze(circuit, model).actual_infidelity
    (echo,) = echo_suggestions(circuit, model)
    assert echo.qubit == "q[1]" and echo.infidelity < 0.8 * before  # q[0] is never idle (its id spans)
    echoed = with_echo(circuit, echo.block, 1, (echo.layers[0] - 1, echo.layers[1] - 1))
    assert analyze(echoed, model).actual_infidelity == pytest.approx(echo.infidelity, rel=1e-12)
    # the ideal circuit is unchanged (cirq unitaries, up to global phase)
    u, v = _cirq_ideal(circuit.unrolled()), _cirq_ideal(echoed.unrolled())
    assert abs(abs(np.trace(u.conj().T @ v)) / u.shape[0] - 1) < 1e-12


def test_no_echo_when_nothing_builds_up(tmp_path):
    from budget.analysis.echo import echo_suggestions
    from budget.circuit.load import load_circuit
    from budget.errors.model import ErrorModel

    circuit = load_circuit(ROOT / "circuits" / "pair_memory_zz.qasm").with_cycles(5)
    model = ErrorModel.from_dict({"gates": {"id": {"duration_ns": 200.0}, "x": {"duration_ns": 40.0, "overrotation": 0.01}}})
    assert echo_suggestions(circuit, model) == ()


def test_cli_echoes_in_json(tmp_path):
    j = tmp_path / "e.json"
    res = runner.invoke(app, ["compensate", str(ROOT / "circuits" / "pair_memory_zz.qasm"), "-e",
                              str(ROOT / "circuits" / "fen_pair_zz.toml"), "--cycles", "5", "--echoes", "--json", str(j)])
    assert res.exit_code == 0, res.output
    (echo,) = json.loads(j.read_text())["echoes"]
    assert echo["qubit"] == "q[1]" and echo["infidelity"] < json.loads(j.read_text())["before"]["infidelity"]
