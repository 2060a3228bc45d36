"""`budget model import` on tables a user wrote by hand, with the gaps real exports have.

Readout error from cirq calibration metrics is the mean of the two assignment errors p(1|0) and
p(0|1) (common practice, no source; docs/import.md states it). When the file gives only one of them
the model takes that one and the TOML comment must say so, not claim a mean. A set of files with no
model value at all must be refused (an empty model reads as a perfect device), with no file written.
"""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from budget.calibdata.importer import import_tables, to_toml
from budget.cli import app
from budget.problems import ModelError

runner = CliRunner()


def _metrics(tmp_path, items) -> str:
    path = tmp_path / "m.json"
    path.write_text(json.dumps({"metrics": {"metrics": [
        {"name": name, "targets": targets, "values": [{"doubleVal": v}]} for name, targets, v in items]}}))
    return str(path)


def test_readout_is_the_mean_of_both_assignment_errors_even_with_an_integer_zero(tmp_path):
    # JSON writers drop the ".0" of a zero: p00 = 0, p11 = 0.02 -> (0 + 0.02)/2 = 0.01
    path = _metrics(tmp_path, [("single_qubit_p00_error", ["q0_0"], 0),
                               ("single_qubit_p11_error", ["q0_0"], 0.02)])
    imported = import_tables([path])
    assert imported.data["qubits"]["q(0, 0)"]["readout_error"] == pytest.approx(0.01)
    assert "mean of p00 and p11" in to_toml(imported)


def test_one_assignment_error_only_is_said_in_the_comment(tmp_path):
    path = _metrics(tmp_path, [("single_qubit_p11_error", ["q0_1"], 0.03)])
    imported = import_tables([path])
    assert imported.data["qubits"]["q(0, 1)"]["readout_error"] == pytest.approx(0.03)
    text = to_toml(imported)
    assert "mean of" not in text and "p11 error of q(0, 1) only" in text


def test_nothing_importable_is_refused_and_no_file_written(tmp_path):
    path = _metrics(tmp_path, [("two_qubit_mystery_gate_xeb_pauli_error_per_cycle", ["q0_0", "q0_1"], 0.01)])
    with pytest.raises(ModelError, match=r"no model value in m.json .*mystery"):
        import_tables([path])
    header_only = tmp_path / "q.csv"
    header_only.write_text("qubit,t1_us,t2_us\n")
    out = tmp_path / "out.toml"
    res = runner.invoke(app, ["model", "import", str(header_only), "--out", str(out)])
    assert res.exit_code == 2 and "no model value in q.csv" in res.output
    assert not out.exists()


def test_one_value_is_one_value(tmp_path):
    table = tmp_path / "q.csv"
    table.write_text("qubit,t1_us\nq[0],50\n")
    res = runner.invoke(app, ["model", "import", str(table), "--out", str(tmp_path / "o.toml")])
    assert res.exit_code == 0 and "(1 value from q.csv)" in " ".join(res.output.split())
