"""The error-model file: what loads, what it means, and one clear message for every bad input.

Rules checked here come from design.md §2 and docs/error-model.md; physical limits cited beside
them (T2 <= 2 T1: the decay of coherence includes half the energy-relaxation rate, common practice,
no source; r <= (d-1)/d: Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)).
"""

from __future__ import annotations

import dataclasses
import re
from pathlib import Path

import numpy as np
import pytest

from budget.errors.model import ErrorModel, key_path, load_model
from budget.errors.params import GateParams, QubitParams
from budget.problems import ModelError

CONTRACT = """\
[qubits]                  # defaults for every qubit
t1_us = 80.0              # absent: no amplitude damping
t2_us = 60.0              # absent: no dephasing; T2 > 2*T1 is rejected
readout_error = 0.01

[qubits."q[3]"]           # one qubit, named as in the circuit
t1_us = 40.0

[gates.sx]
duration_ns = 25.0
overrotation = 0.002      # radians
avg_infidelity = 4e-4     # incoherent part, as randomized benchmarking reports it

[gates.cz]
duration_ns = 40.0
cphase = 0.01
swap_angle = 0.0
z_phase = [0.001, -0.002] # one per qubit, in gate order
avg_infidelity = 4e-3

[gates.cz."q[0],q[1]"]    # one pair, in gate order; inherits gates.cz, replaces what it names
cphase = 0.03

[gates.rx]
pauli = { X = 1e-3, Z = -5e-4 }   # exp(-i sum h_P P) after the gate; labels in gate order
"""


def write(tmp_path: Path, text: str, name: str = "lab.toml") -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def test_contract_example_loads(tmp_path):
    m = load_model(write(tmp_path, CONTRACT))
    assert m.qubit("q[0]") == QubitParams(80.0, 60.0, 0.01)
    assert m.qubit("q[3]") == QubitParams(40.0, 60.0, 0.01)  # inherits T2 and readout
    assert m.gate("sx", ("q[5]",)) == GateParams(duration_ns=25.0, overrotation=0.002, avg_infidelity=4e-4)
    cz = GateParams(duration_ns=40.0, cphase=0.01, swap_angle=0.0, z_phase=(0.001, -0.002), avg_infidelity=4e-3)
    assert m.gate("cz", ("q[1]", "q[2]")) == cz
    assert m.gate("cz", ("q[0]", "q[1]")) == dataclasses.replace(cz, cphase=0.03)
    # cz is symmetric under exchange of its qubits: the pair table applies in either order
    assert m.gate("cz", ("q[1]", "q[0]")) == dataclasses.replace(cz, cphase=0.03)
    assert m.gate("rx", ("q[0]",)).pauli == (("X", 1e-3), ("Z", -5e-4))
    assert m.gate("rz", ("q[0]",)) == GateParams()  # absent gates are ideal with zero duration
    assert m.source == str(tmp_path / "lab.toml")


def test_knob_names():
    # Names engines and reports use (docs/error-model.md): z_phase[i] on two-qubit gates, pauli:LABEL.
    gp = GateParams(cphase=0.01, swap_angle=0.0, z_phase=(0.001, -0.002), pauli={"XI": 2e-4})
    assert gp.knob_values() == {"z_phase[0]": 0.001, "z_phase[1]": -0.002, "cphase": 0.01,
                                "swap_angle": 0.0, "pauli:XI": 2e-4}
    assert GateParams(z_phase=0.003).knob_values() == {"z_phase": 0.003}  # plain number, one qubit


def test_from_dict_aliases_and_integers():
    m = ErrorModel.from_dict({"qubits": {"t1_us": 50}, "gates": {"cnot": {"duration_ns": 300, "overrotation": 0}}})
    assert m.source == "<dict>"
    assert m.gate("cx", ("a", "b")).duration_ns == 300.0 and m.gate("cnot").overrotation == 0.0
    assert m.qubit("x").t1_us == 50.0 and m.qubit("x").t2_us is None


def test_one_qubit_override_and_family():
    m = ErrorModel.from_dict({"gates": {"sx": {"duration_ns": 20, "family": "single", "q[2]": {"avg_infidelity": 1e-3}}}})
    assert m.gate("sx", ("q[2]",)) == GateParams(duration_ns=20.0, avg_infidelity=1e-3, family="single")
    assert m.gate("sx", ("q[1]",)).avg_infidelity == 0.0


def test_key_path_quotes_non_bare_keys():
    assert key_path(("gates", "cz", "q[0],q[1]", "cphase")) == 'gates.cz."q[0],q[1]".cphase'


def test_syntax_error_names_file_and_line(tmp_path):
    # tomllib reports the line; the message starts with file:line (style.md §4).
    p = write(tmp_path, "[gates.sx]\nduration_ns = 25.0\noverrotation = \n")
    with pytest.raises(ModelError, match=re.escape(f"{p}:3: not valid TOML")):
        load_model(p)


def test_missing_file(tmp_path):
    with pytest.raises(ModelError, match="nope.toml: cannot read"):
        load_model(tmp_path / "nope.toml")


# (TOML text, key path, value as shown, a word of the rule)
BAD = [
    ("[gates.sx]\noverrotaton = 0.002\n", "gates.sx.overrotaton", "0.002", "did you mean 'overrotation'"),
    ("[gates.sx]\noverrotation = 'abc'\n", "gates.sx.overrotation", "'abc'", "expected a number"),
    ("[gates.sx]\noverrotation = true\n", "gates.sx.overrotation", "True", "expected a number"),
    ("[gates.cz]\nduration_ns = -5.0\n", "gates.cz.duration_ns", "-5.0", "negative"),
    ("[qubits]\nt1_us = -80.0\n", "qubits.t1_us", "-80.0", "positive"),
    ("[qubits]\nt1_us = 0\n", "qubits.t1_us", "0", "positive"),
    ("[qubits]\nt1_us = 30.0\nt2_us = 70.0\n", "qubits.t2_us", "70.0", "T2 <= 2·T1"),
    ("[qubits]\nt2_us = 70.0\n[qubits.\"q[3]\"]\nt1_us = 30.0\n", 'qubits."q[3]".t1_us', "30.0", "T2 <= 2·T1"),
    ("[qubits]\nreadout_error = 1.5\n", "qubits.readout_error", "1.5", "[0.0, 1.0]"),
    ("[qubits]\nreadout_error = -0.1\n", "qubits.readout_error", "-0.1", "[0.0, 1.0]"),
    ("[gates.sx]\navg_infidelity = 0.6\n", "gates.sx.avg_infidelity", "0.6", "(d-1)/d"),
    ("[gates.cz]\navg_infidelity = 0.8\n", "gates.cz.avg_infidelity", "0.8", "(d-1)/d"),
    ("[gates.cz]\navg_infidelity = -1e-3\n", "gates.cz.avg_infidelity", "-0.001", "[0.0, 1.0]"),
    ("[gates.cz]\npauli = { X = 1e-3 }\n", "gates.cz.pauli.X", "0.001", "acts on 2 qubit"),
    ("[gates.rx]\npauli = { XQ = 1e-3 }\n", "gates.rx.pauli.XQ", "0.001", "letters I, X, Y, Z"),
    ("[gates.rx]\npauli = { x = 1e-3 }\n", "gates.rx.pauli.x", "0.001", "letters I, X, Y, Z"),
    ("[gates.rx]\npauli = { I = 1e-3 }\n", "gates.rx.pauli.I", "0.001", "global phase"),
    ("[gates.sx]\ncphase = 0.01\n", "gates.sx.cphase", "0.01", "two-qubit gates"),
    ("[gates.x]\nswap_angle = 0.01\n", "gates.x.swap_angle", "0.01", "two-qubit gates"),
    ("[gates.cz]\naxis_error = 0.01\n", "gates.cz.axis_error", "0.01", "XY plane"),
    ("[gates.h]\naxis_error = 0.01\n", "gates.h.axis_error", "0.01", "XY plane"),
    ("[gates.swap]\noverrotation = 0.01\n", "gates.swap.overrotation", "0.01", "no rotation angle"),
    ("[gates.cz]\nz_phase = [0.001]\n", "gates.cz.z_phase", "[0.001]", "one value per qubit"),
    ("[gates.cz]\nz_phase = 0.001\n", "gates.cz.z_phase", "0.001", "one value per qubit"),
    ("[gates.sx]\nz_phase = [0.1, 0.2]\n", "gates.sx.z_phase", "[0.1, 0.2]", "one value per qubit"),
    ("[gates.cz.\"q[0]\"]\ncphase = 0.01\n", 'gates.cz."q[0]"', "{'cphase': 0.01}", "2 distinct"),
    ("[gates.cz.\"q[0],q[0]\"]\ncphase = 0.01\n", 'gates.cz."q[0],q[0]"', "{'cphase': 0.01}", "2 distinct"),
    ("[gates.cz]\ncphase = 100.0\n", "gates.cz.cphase", "100.0", "not a small calibration error"),
    ("[gates.x]\noverrotation = -3.2\n", "gates.x.overrotation", "-3.2", "[-π, π] rad"),
    ("[gates.cz]\nz_phase = [0.001, 7.0]\n", "gates.cz.z_phase", "[0.001, 7.0]", "not a small calibration error"),
    ("[gates.rx]\npauli = { X = 4.0 }\n", "gates.rx.pauli.X", "4.0", "not a small calibration error"),
    ("[gates.cz.\"q[0],q[1]\"]\ncphas = 0.01\n", 'gates.cz."q[0],q[1]".cphas', "0.01", "did you mean 'cphase'"),
    ("[gates.cz.\"q[0],q[1]\"]\ncphase = 0.1\nz_phase = [0.1]\n", 'gates.cz."q[0],q[1]".z_phase', "[0.1]", "one value per qubit"),
    ("[gates.fsim]\nduration_ns = 30.0\n", "gates.fsim", "{'duration_ns': 30.0}", "not a gate in the gate table"),
    ("[gates.cnot]\nduration_ns = 30.0\n[gates.cx]\nduration_ns = 30.0\n", "gates.cx", "{'duration_ns': 30.0}", "already described"),
    ("[gates.sx]\noverrotation = nan\n", "gates.sx.overrotation", "nan", "finite"),
    ("[qubits]\nt1_us = inf\n", "qubits.t1_us", "inf", "finite"),
    ("[gates.sx]\npauli = { X = inf }\n", "gates.sx.pauli.X", "inf", "finite"),
    ("[qubit]\nt1_us = 80.0\n", "qubit", "{'t1_us': 80.0}", "did you mean 'qubits'"),
    ("[qubits]\nt1 = 80.0\n", "qubits.t1", "80.0", "unknown key"),
    ("[gates.sx]\npaulli = { X = 1e-3 }\n", "gates.sx.paulli", "{'X': 0.001}", "did you mean 'pauli'"),
    ("[gates.sx]\nfamily = 3\n", "gates.sx.family", "3", "non-empty string"),
    ("gates = 3\n", "gates", "3", "expected a table"),
]


@pytest.mark.parametrize("text,path,value,rule", BAD, ids=[b[1] + ":" + b[3] for b in BAD])
def test_bad_input_gives_one_clear_message(tmp_path, text, path, value, rule):
    p = write(tmp_path, text, "fen.toml")
    with pytest.raises(ModelError) as err:
        load_model(p)
    msg = str(err.value)
    assert msg.startswith(f"{path} = {value} in {p}: "), msg
    assert rule in msg
    assert "\n" not in msg


def test_from_dict_errors_name_the_source():
    with pytest.raises(ModelError, match=r"gates\.sx\.duration_ns = -1 in <dict>: must not be negative"):
        ErrorModel.from_dict({"gates": {"sx": {"duration_ns": -1}}})
    with pytest.raises(ModelError, match="nb.toml"):
        ErrorModel.from_dict({"gates": {"sx": {"duration_ns": "25 ns"}}}, source="nb.toml")


def test_dataclasses_validate_when_built_directly():
    # style.md §3: validation in __post_init__, ValueError naming field, value and rule.
    with pytest.raises(ValueError, match="t2_us = 90.0: needs T2 <= 2·T1"):
        QubitParams(t1_us=40.0, t2_us=90.0)
    with pytest.raises(ValueError, match="duration_ns = -1.0"):
        GateParams(duration_ns=-1.0)
    with pytest.raises(ValueError, match="cphase"):
        GateParams(cphase=0.1).check_gate("sx")


def _doc_blocks() -> list[str]:
    doc = Path(__file__).resolve().parents[1] / "docs" / "error-model.md"
    return re.findall(r"```toml\n(.*?)```", doc.read_text(), flags=re.S)


def test_every_toml_block_in_the_docs_loads(tmp_path):
    # docs/error-model.md examples are tests (style.md §9).
    blocks = _doc_blocks()
    assert blocks
    for i, block in enumerate(blocks):
        load_model(write(tmp_path, block, f"doc{i}.toml"))


def test_pair_table_of_a_symmetric_gate_applies_with_its_qubits_exchanged():
    # A cz, iswap or rzz coupler is the same physical gate whichever qubit is written first
    # (SWAP U SWAP = U; common practice, no source), so its pair calibration applies in both orders:
    # the error unitary of "cz q[2],q[1]" is the one of "cz q[1],q[2]" with the qubits exchanged.
    # Per-qubit values the table itself names are reversed; values inherited from the gate's
    # table stay in gate order (their documented meaning); cx, not symmetric, is not mirrored.
    from budget.circuit.ir import Layer, Operation, StructuredCircuit
    from budget.errors.attach import attach

    m = ErrorModel.from_dict({"gates": {
        "cz": {"cphase": 0.01, "q[1],q[2]": {"cphase": 0.05, "z_phase": [0.004, -0.003], "pauli": {"ZX": 2e-3}}},
        "cx": {"q[1],q[2]": {"overrotation": 0.02}},
    }})
    swap = np.array([[1, 0, 0, 0], [0, 0, 1, 0], [0, 1, 0, 0], [0, 0, 0, 1]])

    def coherent(gate, qubits):
        c = StructuredCircuit(("q[0]", "q[1]", "q[2]"), (Layer((Operation(gate, qubits),)),))
        return attach(c, m).body[0].operations[0].coherent

    forward, backward = coherent("cz", (1, 2)), coherent("cz", (2, 1))
    assert not np.allclose(forward, backward)  # the table is not symmetric itself
    np.testing.assert_allclose(backward, swap @ forward @ swap, atol=1e-12)
    assert m.gate("cz", ("q[2]", "q[1]")).z_phase == (-0.003, 0.004)
    assert m.gate("cx", ("q[2]", "q[1]")).overrotation is None
    inherited = ErrorModel.from_dict({"gates": {"cz": {"z_phase": [0.001, 0.002], "q[1],q[2]": {"cphase": 0.05}}}})
    assert inherited.gate("cz", ("q[2]", "q[1]")).z_phase == (0.001, 0.002)
    both = ErrorModel.from_dict({"gates": {"cz": {"q[1],q[2]": {"cphase": 0.05}, "q[2],q[1]": {"cphase": 0.07}}}})
    assert both.gate("cz", ("q[2]", "q[1]")).cphase == 0.07  # a table for each order: each wins


def test_large_but_allowed_angles_are_warned_with_their_key_path():
    # |angle| in (0.5, π] rad is accepted, but every view shows a warning naming the key (issue 9 item 6)
    from budget.analysis.run import analyze
    from budget.circuit.ir import Layer, Operation, StructuredCircuit

    m = ErrorModel.from_dict({"gates": {"cz": {"cphase": 0.8}, "x": {"overrotation": 0.01}}})
    assert m.warnings() == ("<dict>: gates.cz.cphase = 0.8 rad is larger than 0.5 rad, unusual for a calibration "
                            "error (check that it is in radians and is the error, not the angle)",)
    c = StructuredCircuit(("q[0]", "q[1]"), (Layer((Operation("cz", (0, 1)),)),))
    assert any("gates.cz.cphase = 0.8" in w for w in analyze(c, m).warnings)
    assert ErrorModel.from_dict({"gates": {"cz": {"cphase": 0.3}}}).warnings() == ()
