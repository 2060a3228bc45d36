"""The readout summary: measured qubits only, an explicit assumption when the circuit measures
none, and no readout number for the metrics that already include readout (issue 13)."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from budget.cli import app

MODEL = "[qubits]\nreadout_error = 0.02\n[gates.h]\noverrotation = 0.01\n"


def _run(tmp_path, text: str, *extra: str):
    src = tmp_path / "c.qasm"
    src.write_text(text)
    model = tmp_path / "m.toml"
    model.write_text(MODEL)
    out = tmp_path / "o.json"
    res = CliRunner().invoke(app, ["analyze", str(src), "-e", str(model), "--json", str(out), *extra],
                             env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    return res.output, json.loads(out.read_text())


def test_measured_qubits_only(tmp_path):
    """Two of three qubits measured: 1 - (1 - 0.02)² (independent misreads, common practice)."""
    text = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[3];\ncreg c[2];\nh q[0];\nh q[1];\nh q[2];\n' \
           "measure q[0] -> c[0];\nmeasure q[2] -> c[1];\n"
    output, data = _run(tmp_path, text)
    assert set(data["readout"]["per_qubit"]) == {"q[0]", "q[2]"}
    assert abs(data["readout"]["any_error"] - (1 - 0.98**2)) < 1e-12
    assert data["readout"]["assumed_read_at_end"] is False
    assert "2 measured qubit(s)" in output


def test_no_measurement_says_the_assumption(tmp_path):
    text = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[3];\nh q[0];\nh q[1];\nh q[2];\n'
    output, data = _run(tmp_path, text)
    assert data["readout"]["assumed_read_at_end"] is True
    assert len(data["readout"]["per_qubit"]) == 3
    assert "measured qubit(s)" not in output
    assert "measures no qubit; if all 3 are read at the end" in " ".join(output.split())


def test_measured_metrics_leave_any_error_null(tmp_path):
    text = 'OPENQASM 3;\ninclude "stdgates.inc";\nqubit[2] q;\nbit[2] c;\nh q[0];\nh q[0];\ncx q[0], q[1];\n' \
           "c[0] = measure q[1];\nreset q[1];\ncx q[0], q[1];\nc[1] = measure q[1];\n"
    for metric in ("detectors", "record"):
        output, data = _run(tmp_path, text, "--metric", metric)
        assert data["readout"]["any_error"] is None and data["readout"]["per_qubit"] == {}
        assert "misread" not in output
