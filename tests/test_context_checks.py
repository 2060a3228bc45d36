"""Model checks of issue 14: ``[[context]]`` tables that match nothing, and qubit names beyond the
circuit. Decisions (docs/error-model.md): an unmatched table is a warning naming its key path, what
it selects and the rule (a device-wide model holds tables for layers a circuit never has); a qubit
beyond the circuit's register is an error with its key path unless the model says
``device_wide = true``."""

from __future__ import annotations

from typer.testing import CliRunner

from budget.analysis.run import analyze
from budget.circuit.qasm import parse_qasm
from budget.cli import app

CIRCUIT = """OPENQASM 2.0;
include "qelib1.inc";
qreg q[3];
cz q[0], q[1];
x q[2];
cz q[1], q[2];
"""

MODEL = {
    "gates": {"cz": {"duration_ns": 60.0, "cphase": 0.01}, "x": {"duration_ns": 30.0}},
    "context": [
        {"name": "beside x", "gate": "cz", "qubits": "q[0],q[1]", "with": ["x q[2]"], "cphase": 0.03},
        {"name": "never", "gate": "cz", "qubits": "q[0],q[2]", "with": ["x q[1]"], "cphase": 0.05},
    ],
}


def test_unmatched_context_table_is_named_in_a_warning():
    result = analyze(parse_qasm(CIRCUIT, source="c.qasm"), MODEL)
    lines = [w for w in result.warnings if "matches no operation" in w]
    assert len(lines) == 1
    assert lines[0].startswith("context.1 in <dict> (cz on q[0],q[2] with x q[1]) matches no operation of c.qasm")
    # the matched table is used: the first cz carries its cphase (family "cz [beside x]")
    assert any(f.name == "cz [beside x]" for f in result.families)


def test_unmatched_context_warning_in_the_terminal(tmp_path):
    src = tmp_path / "c.qasm"
    src.write_text(CIRCUIT)
    model = tmp_path / "m.toml"
    model.write_text('[gates.cz]\nduration_ns = 60.0\ncphase = 0.01\n[gates.x]\nduration_ns = 30.0\n'
                     '[[context]]\nname = "typo"\ngate = "cz"\nqubits = "q[1],q[0]"\nwith = ["x q[1]"]\ncphase = 0.2\n')
    res = CliRunner().invoke(app, ["analyze", str(src), "-e", str(model)], env={"COLUMNS": "300"})
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "context.0 in" in text and "(cz on q[1],q[0] with x q[1]) matches no operation" in text


def test_qubit_beyond_the_register_is_refused_with_its_key_path(tmp_path):
    src = tmp_path / "c.qasm"
    src.write_text(CIRCUIT)
    model = tmp_path / "m.toml"
    model.write_text('[couplings."q[2],q[5]"]\nzz_khz = 100.0\n')
    res = CliRunner().invoke(app, ["analyze", str(src), "-e", str(model)], env={"COLUMNS": "400"})
    assert res.exit_code == 2
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and 'couplings."q[2],q[5]"' in lines[0] and "'q[5]' is beyond" in lines[0]
    assert "device_wide = true" in lines[0]
    model.write_text('device_wide = true\n[couplings."q[2],q[5]"]\nzz_khz = 100.0\n')
    assert CliRunner().invoke(app, ["analyze", str(src), "-e", str(model)]).exit_code == 0
