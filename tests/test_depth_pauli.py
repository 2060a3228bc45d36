"""Depth curves of circuits only the pauli engine holds (`budget depth` under auto).

A 12-qubit transverse-field Ising Trotter step (non-Clifford; dense engines refuse 12 qubits for
the process metric): the front door picks the pauli engine for the curve, and every point equals
`budget analyze -n N` at the same N within the two runs' stated truncation bounds (the curve runs
the engine's brief variant, whose threshold may be looser). Reference outside the curve code: the
analyze command's own run of the same engine on the same folded circuit, and the truncation bound
checked against untruncated values in tests/test_pauli.py.
"""

from __future__ import annotations

import json

from typer.testing import CliRunner

from budget.cli import app
from pauli_cases import ising_model, ising_qasm


def _files(tmp_path):
    text = ising_qasm(12, 1).replace("for int s in [1:1] {", "").rstrip("}")
    circuit = tmp_path / "step.qasm"
    circuit.write_text(text + "\n")
    lines = []
    model = ising_model()
    for gate, values in model["gates"].items():
        lines.append(f"[gates.{gate}]")
        lines += [f"{k} = {v}" for k, v in values.items()]
    lines.append("[qubits]")
    lines += [f"{k} = {v}" for k, v in model["qubits"].items()]
    errors = tmp_path / "model.toml"
    errors.write_text("\n".join(lines) + "\n")
    return str(circuit), str(errors)


def test_auto_depth_curve_uses_pauli_and_agrees_with_analyze(tmp_path):
    circuit, errors = _files(tmp_path)
    runner = CliRunner()
    out = tmp_path / "depth.json"
    res = runner.invoke(app, ["depth", circuit, "-e", errors, "--max-cycles", "4", "--points", "3", "--json", str(out), "-q"])
    assert res.exit_code == 0, res.output
    curve = json.loads(out.read_text())
    assert curve["engine"] == "pauli"
    assert len(curve["repetitions"]) >= 2
    for n, value in zip(curve["repetitions"], curve["actual"]):
        one = tmp_path / f"a{n}.json"
        res = runner.invoke(app, ["analyze", circuit, "-e", errors, "-n", str(n), "--json", str(one), "-q"])
        assert res.exit_code == 0, res.output
        budget = json.loads(one.read_text())
        assert budget["engine"] == "pauli"
        actual = budget["actual"]
        # both runs aim at a bound of 1 % of the value; the curve's is at most as tight as analyze's
        slack = actual["truncation_bound"] + 0.01 * actual["first_order"] + 1e-12
        assert abs(value - actual["infidelity"]) <= 2 * slack, (n, value, actual)
