"""Mid-circuit measurement, reset and feed-forward in the readers and the error model (issue 13).

Outside references: stim's own circuits (its generator and its measurement record) for the
OpenQASM it writes, and cirq's circuits for the cirq reader.
"""

from __future__ import annotations

import cirq
import pytest
import stim

from budget.engines.door import choose_engine
from budget.circuit.ir import IfBlock, Layer, Measure, Repeat, Reset
from budget.circuit.load import load_circuit
from budget.circuit.qasm import parse_qasm
from budget.engines import ENGINE_NAMES, get_engine
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyMeasure, NoisyReset
from budget.problems import InputError, ModelError


def kinds(items) -> list[str]:
    return [type(it).__name__ for it in items]


def test_qasm2_measure_reset_and_if():
    c = parse_qasm(
        'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\ncreg c[2];\nh q[0];\nmeasure q[0] -> c[0];\n'
        "reset q[0];\nif (c == 1) x q[1];\nmeasure q -> c;\n"
    )
    assert kinds(c.body) == ["Layer", "Measure", "Reset", "IfBlock", "Measure"]
    assert c.body[1].bits == ("c[0]",) and c.body[2].qubits == (0,)
    assert c.body[3].bits == ("c[0]", "c[1]") and c.body[3].value == 1 and c.body[3].line == 8
    assert c.body[4].qubits == (0, 1) and c.body[4].bits == ("c[0]", "c[1]")
    assert c.measured == () and c.has_mid_circuit


def test_final_measurements_stay_a_readout():
    c = parse_qasm('OPENQASM 3;\ninclude "stdgates.inc";\nqubit[2] q;\nbit[2] c;\nh q[0];\nc = measure q;\n')
    assert not c.has_mid_circuit and c.measured == (0, 1) and kinds(c.body) == ["Layer"]


def test_qasm3_measure_expression_if_else_and_folded_loops():
    text = """OPENQASM 3;
include "stdgates.inc";
qubit[3] q;
bit[2] c;
bit[5] r;
bit s;
for int i in [0:4] {
  cx q[0], q[2];
  r[i] = measure q[2];
  reset q[2];
  if (r[i]) { x q[0]; } else { id q[0]; }
}
for int k in [1:1000] {
  cx q[1], q[2];
  s = measure q[2];
  if (!s) { x q[2]; }
}
c[0] = measure q[0];
measure q[1] -> c[1];
if (c == 2) { x q[2]; }
"""
    c = parse_qasm(text)
    assert kinds(c.body) == ["Repeat", "Repeat", "Measure", "IfBlock"]
    first, second = c.body[0], c.body[1]
    assert first.count == 5 and kinds(first.body) == ["Layer", "Measure", "Reset", "IfBlock"]
    assert first.body[1].bits == ("r[i]",) and first.body[3].bits == ("r[i]",) and first.body[3].value == 1
    assert kinds(first.body[3].then) == ["Layer"] and kinds(first.body[3].orelse) == ["Layer"]
    assert second.count == 1000 and second.body[2].bits == ("s",) and second.body[2].value == 0
    assert c.body[3].bits == ("c[0]", "c[1]") and c.body[3].value == 2
    assert c.executed_counts()[0] == 5 * 2 + 1000 * 2 + 1  # if blocks count their larger branch


def _stim_measured_qubits(circuit: stim.Circuit) -> list[int]:
    """Qubit of each entry of stim's measurement record, in record order (stim's own walk)."""
    out = []
    for inst in circuit.flattened():
        if inst.name in ("M", "MR"):
            out.extend(t.value for t in inst.targets_copy())
    return out


@pytest.mark.parametrize("code", ["repetition_code:memory", "surface_code:rotated_memory_z"])
@pytest.mark.parametrize("version", [2, 3])
def test_stim_generated_circuits_are_read(code, version):
    """Reference: stim's generator and its measurement record. Every record entry rec[k] is read
    as a measurement of the qubit stim measures k-th, and stim's resets become reset items."""
    circuit = stim.Circuit.generated(code, distance=3, rounds=4, after_clifford_depolarization=0.001)
    text = circuit.without_noise().to_qasm(open_qasm_version=version, skip_dets_and_obs=True)
    c = parse_qasm(text, source=f"{code}.qasm")
    ours: dict[int, int] = {}
    resets = 0
    for it in c.body:
        if isinstance(it, Measure):
            for q, b in zip(it.qubits, it.bits):
                ours[int(b[4:-1])] = int(c.qubits[q][2:-1])
        elif isinstance(it, Reset):
            resets += len(it.qubits)
    expected = _stim_measured_qubits(circuit)
    assert [ours[k] for k in range(len(ours))] == expected
    stim_resets = sum(len(i.targets_copy()) for i in circuit.flattened() if i.name in ("R", "MR"))
    assert resets == stim_resets
    # measure-then-reset of all ancillas groups into one measurement and one reset item per round
    rounds = [it for it in c.body if isinstance(it, Measure)]
    assert len(rounds) == 4


def test_cirq_measure_reset_and_classical_control_in_repetitions():
    q = cirq.LineQubit.range(3)
    body = cirq.Circuit(
        cirq.CNOT(q[0], q[2]),
        cirq.measure(q[2], key="s"),
        cirq.ResetChannel().on(q[2]),
        cirq.X(q[1]).with_classical_controls("s"),
    )
    circuit = cirq.Circuit(cirq.H(q[0]), cirq.CircuitOperation(body.freeze(), repetitions=7), cirq.measure(*q, key="f"))
    c = load_circuit(circuit)
    assert kinds(c.body) == ["Layer", "Repeat", "Measure"]
    rep = c.body[1]
    assert rep.count == 7 and kinds(rep.body) == ["Layer", "Measure", "Reset", "IfBlock"]
    assert rep.body[1].bits == ("s",) and rep.body[3].bits == ("s",) and rep.body[3].value == 1
    assert c.body[2].bits == ("f[0]", "f[1]", "f[2]")


def test_error_model_measure_and_reset_keys():
    model = ErrorModel.from_dict(
        {
            "qubits": {"readout_error": 0.01, "reset_error": 0.002, "t1_us": 50.0},
            "gates": {"measure": {"duration_ns": 500.0}, "reset": {"duration_ns": 200.0, "q[1]": {"duration_ns": 300.0}}},
        }
    )
    c = parse_qasm("OPENQASM 3;\nqubit[3] q;\nbit b;\nb = measure q[0];\nreset q[1];\nx q[0];\n")
    noisy = attach(c, model)
    m, r = noisy.body[0], noisy.body[1]
    assert isinstance(m, NoisyMeasure) and m.readout_error == (0.01,) and m.duration_ns == 500.0
    assert {x.qubit for x in m.idle} == {1, 2}
    assert isinstance(r, NoisyReset) and r.reset_error == (0.002,) and r.duration_ns == 300.0
    # idle during the measurement: amplitude damping 1 - exp(-t/T1) (common practice, no source)
    assert m.idle[0].gamma == pytest.approx(1 - 2.718281828459045 ** (-0.5 / 50.0))


@pytest.mark.parametrize(
    "data, words",
    [
        ({"qubits": {"reset_error": 1.5}}, ["qubits.reset_error = 1.5", "[0.0, 1.0]"]),
        ({"gates": {"measure": {"duration_ns": -1}}}, ["gates.measure.duration_ns = -1", "negative"]),
        ({"gates": {"reset": {"overrotation": 0.1}}}, ["gates.reset.overrotation = 0.1", "only duration_ns"]),
        ({"gates": {"measure": {"avg_infidelity": 0.1}}}, ["gates.measure.avg_infidelity", "readout_error"]),
    ],
)
def test_error_model_bad_measure_keys(data, words):
    with pytest.raises(ModelError) as err:
        ErrorModel.from_dict(data, "lab.toml")
    for w in words:
        assert w in str(err.value), str(err.value)


def test_gate_only_engines_refuse_mid_circuit_items():
    c = parse_qasm("OPENQASM 3;\nqubit[2] q;\nbit b;\nh q[0];\nb = measure q[0];\nx q[0];\n", source="m.qasm")
    noisy = attach(c, ErrorModel.from_dict({}))
    for name in ENGINE_NAMES:
        for metric in ("process", "state"):
            reason = get_engine(name).fits(noisy, metric)
            assert reason is not None and "measurement at line 5" in reason and "\n" not in reason
    with pytest.raises(InputError, match="^m.qasm:5: measurement"):
        choose_engine(noisy, "state")
    with pytest.raises(TypeError, match="measurement"):
        list(c.iter_layers())


def test_unknown_item_kinds_are_refused_by_walkers():
    c = parse_qasm("OPENQASM 3;\nqubit q;\nbit b;\nreset q;\nb = measure q;\nif (b) { x q; }\n")
    assert isinstance(c.body[2], IfBlock) and isinstance(c.body[2].then[0], Layer)
    assert not any(isinstance(it, Repeat) for it in c.body)
    assert [op.gate for op in c.distinct_operations()] == ["x"]
