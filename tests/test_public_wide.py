"""Every public circuit of 10-27 qubits without mid-circuit measurement or classical control is
analysed for the process metric (the one the dense engines cannot hold there): no command refuses
it for want of an engine, and none ends in a traceback.

The circuits are read from ../shared/qasm-public (skipped when absent) with the invented model of
benchmarks/public_model.toml. `analyze` runs the pauli engine by name here: under auto the model's
first-order incoherent sum exceeds 1 on these circuits, so auto hands over to the exact engine,
which takes minutes at 10 qubits; that run and `report` are timed by benchmarks/bench_public.py
(figures in docs/benchmarks.md).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from budget.circuit.load import load_circuit
from budget.cli import app
from budget.problems import InputError

ROOT = Path(__file__).resolve().parent.parent
PUBLIC = ROOT.parent / "shared" / "qasm-public"
MODEL = ROOT / "benchmarks" / "public_model.toml"
COMMANDS = {
    "analyze": ["analyze", "--engine", "pauli", "-q", "--json", "{j}"],
    "depth": ["depth", "-q", "--max-cycles", "3", "--points", "2", "--json", "{j}"],
    "tolerances": ["tolerances", "--target", "0.1", "--json", "{j}"],
    "cost": ["cost", "--target", "0.1"],
}


def _wide() -> list[str]:
    """The public files of 10-27 qubits that read as gate-only circuits (measurements at the end)."""
    if not PUBLIC.is_dir():
        return []
    out = []
    for path in sorted(PUBLIC.glob("*.qasm")):
        try:
            circuit = load_circuit(path)
        except InputError:  # mid-circuit reset or classical control: refused by the reader, by design
            continue
        if 10 <= circuit.num_qubits <= 27 and not circuit.has_mid_circuit:
            out.append(path.name)
    return out


def test_the_selection_is_not_empty():
    if not PUBLIC.is_dir():
        pytest.skip("../shared/qasm-public is absent")
    assert _wide(), "no public circuit of 10-27 qubits found"


@pytest.mark.skipif(not PUBLIC.is_dir(), reason="../shared/qasm-public is absent")
@pytest.mark.parametrize("name", _wide())
@pytest.mark.parametrize("command", list(COMMANDS))
def test_wide_public_circuit_is_analysed(name, command, tmp_path):
    j = tmp_path / "out.json"
    args = [COMMANDS[command][0], str(PUBLIC / name), "-e", str(MODEL)] + [a.format(j=j) for a in COMMANDS[command][1:]]
    res = CliRunner().invoke(app, args, catch_exceptions=True)
    assert res.exception is None or isinstance(res.exception, SystemExit), repr(res.exception)
    assert res.exit_code == 0, res.output[-800:]
    if j.exists():
        data = json.loads(j.read_text())
        if command == "analyze":
            assert data["engine"] == "pauli" and data["actual"]["truncation_bound"] is not None
        if command == "depth":
            assert len(data["repetitions"]) == 2
