"""The command line: reports, JSON, and bad input (one message, non-zero exit, no output file)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from budget.cli import app

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "circuits"
runner = CliRunner()


def run(*args: str):
    return runner.invoke(app, [*args], catch_exceptions=False)


def test_analyze_writes_json_and_report(tmp_path):
    out = tmp_path / "r.json"
    res = run("analyze", str(EXAMPLES / "parity_cycle.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
              "--cycles", "10", "--json", str(out), "--width", "120")
    assert res.exit_code == 0, res.output
    assert "fidelity product" in res.output and "model predictions" in res.output
    data = json.loads(out.read_text())
    assert data["schema_version"] == 2
    assert data["circuit"]["qubits"] == 5
    assert data["circuit"]["operations"] == 10 * 8
    assert abs(sum(f["share"] for f in data["families"]) - data["actual"]["infidelity"]) < 1e-9


def test_demo_runs():
    res = run("demo", "--width", "120")
    assert res.exit_code == 0, res.output
    assert "North Fen" in res.output
    assert "zz q[0],q[1]" in res.output  # the spectator-ZZ memory examples run with their own model


def _bad(tmp_path: Path, model_text: str | None = None, circuit_text: str | None = None, extra=()):
    model = tmp_path / "m.toml"
    model.write_text(model_text if model_text is not None else "[gates.cz]\ncphase = 0.01\n")
    circ = tmp_path / "c.qasm"
    circ.write_text(circuit_text if circuit_text is not None else
                    'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\ncz q[0],q[1];\n')
    out = tmp_path / "out.json"
    res = run("analyze", str(circ), "--errors", str(model), "--json", str(out), *extra)
    return res, out


BAD_MODELS = [
    ("[gates.sx]\noverrotaton = 0.01\n", "overrotaton"),
    ("[gates.cz]\ncphase = 'abc'\n", "cphase"),
    ("[qubits]\nt1_us = 50.0\nt2_us = 120.0\n", "t2_us"),
    ("[qubits]\nt1_us = -5.0\n", "t1_us"),
    ("[gates.cz]\navg_infidelity = -1e-3\n", "avg_infidelity"),
    ("[gates.rx]\npauli = { XX = 1e-3 }\n", "pauli"),
    ("[gates.sx]\ncphase = 0.01\n", "cphase"),
    ("[gates.cz\n", "m.toml"),
]


@pytest.mark.parametrize("text,key", BAD_MODELS)
def test_bad_models_give_one_clear_line(tmp_path, text, key):
    res, out = _bad(tmp_path, model_text=text)
    assert res.exit_code != 0
    assert key in res.output and "m.toml" in res.output
    assert "Traceback" not in res.output
    assert not out.exists()


BAD_CIRCUITS = [
    ('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nfoo q[0];\n', "foo", ":4"),
    ('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0]\ncx q[0],q[1];\n', "c.qasm", ":"),
    ('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\ncreg c[2];\nreset q[0];\n', "reset", ":5"),
]


@pytest.mark.parametrize("text,word,line", BAD_CIRCUITS)
def test_bad_circuits_give_one_clear_line(tmp_path, text, word, line):
    res, out = _bad(tmp_path, circuit_text=text)
    assert res.exit_code != 0
    assert word in res.output and "c.qasm" + line in res.output.replace("\n", "")
    assert "Traceback" not in res.output
    assert not out.exists()


def test_missing_file_and_bad_output_folder(tmp_path):
    res = run("analyze", str(tmp_path / "nope.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"))
    assert res.exit_code != 0 and "nope.qasm" in res.output
    res = run("analyze", str(EXAMPLES / "echo_xy4.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
              "--json", str(tmp_path / "no" / "such" / "r.json"))
    assert res.exit_code != 0 and "does not exist" in res.output


def test_too_large_for_the_chosen_engine(tmp_path):
    qasm = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[30];\n' + "".join(
        f"h q[{i}];\nt q[{i}];\n" for i in range(30))
    res, out = _bad(tmp_path, circuit_text=qasm, model_text="[gates.h]\noverrotation = 0.01\n",
                    extra=("--engine", "exact"))
    line = res.output.strip()
    assert res.exit_code == 2 and "engine exact" in line and "limit 12 qubits" in line
    assert "\n" not in line and len(line) < 250 + len(str(tmp_path))  # one short line
    assert not out.exists()


def test_clifford_drilldown_and_qubit_map_in_report_and_json(tmp_path):
    out = tmp_path / "r.json"
    res = run("analyze", str(EXAMPLES / "parity_cycle.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
              "--cycles", "10", "--engine", "clifford", "--json", str(out), "--width", "120")
    assert res.exit_code == 0, res.output
    assert "top operations" in res.output and "where the error lands" in res.output
    data = json.loads(out.read_text())
    top = data["details"]["top_operations"]
    assert top and top[0]["gate"] == "cz"
    # the per-qubit map names every qubit of the circuit
    assert set(data["details"]["qubit_map"]) == {f"q[{i}]" for i in range(5)}
    for name in data["details"]["qubit_map"]:
        assert name in res.output
