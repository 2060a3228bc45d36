"""`budget model import` on tables a user wrote by hand, with the gaps real exports have.

Readout error from cirq calibration metrics is the mean of the two assignment errors p(1|0) and
p(0|1) (common practice, no source; docs/import.md states it). When the file gives only one of them
the model takes that one and the TOML comment must say so, not claim a mean. A set of files with no
model value at all must be refused (an empty model reads as a perfect device), with no file written.
"""

from __future__ import annotations

import json
import math

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


def test_sweep_draws_only_values_the_circuit_uses(tmp_path):
    # A device model covers more gates and qubits than one circuit uses; an uncertainty on a gate
    # the circuit never applies cannot move its infidelity, so it is listed apart, not drawn, and
    # the result equals the sweep of the model without it (same seed, same draws).
    from budget.analysis.sweep import sweep

    circuit = tmp_path / "c.qasm"
    circuit.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\nx q[0];\nx q[0];\nx q[0];\n')
    used = {"gates": {"x": {"duration_ns": 40.0, "overrotation": {"value": 0.01, "sigma": 0.004}}}}
    extra = {"gates": {**used["gates"], "cz": {"duration_ns": 60.0, "cphase": {"value": 0.0, "sigma": 0.01}}},
             "qubits": {"q[7]": {"t1_us": {"value": 50.0, "sigma": 5.0}}}, "device_wide": True}
    a = sweep(circuit, used, samples=40, sobol_base=0, workers=1)
    b = sweep(circuit, extra, samples=40, sobol_base=0, workers=1)
    assert [f"{v.knob}@{v.site}" for v in b.varied] == ["x.overrotation@all"]
    assert set(b.unused) == {"cz.cphase@all", "t1_us@q[7]"}
    assert b.now.mean == pytest.approx(a.now.mean, rel=1e-12)
    # three x pulses over-rotated by ε: Rx(3ε) up to the ideal, process infidelity sin²(3ε/2) =
    # (1 - cos 3ε)/2; for ε ~ N(μ, σ²), E[cos 3ε] = cos(3μ)·exp(-9σ²/2) (characteristic function of
    # the normal distribution), so the mean is (1 - cos(3μ)·exp(-9σ²/2))/2, within the sweep's own
    # Monte Carlo error
    expected = (1 - math.cos(0.03) * math.exp(-9 * 0.004**2 / 2)) / 2
    assert abs(b.now.mean - expected) < 4 * b.now.mean_stderr


def test_csv_with_cirq_grid_names_keeps_them_whole(tmp_path):
    # cirq names a grid qubit "q(0, 1)" (docs/circuit-formats.md); the name's own comma and space
    # must not split it, so the imported tables match the cirq circuit's qubits
    import cirq

    a, b = cirq.GridQubit(0, 0), cirq.GridQubit(0, 1)
    circuit = tmp_path / "c.json"
    circuit.write_text(cirq.to_json(cirq.Circuit([cirq.CZ(a, b)])))
    gates = tmp_path / "g.csv"
    gates.write_text('gate,qubits,cphase\ncz,"q(0, 0) q(0, 1)",0.01\n')
    qubits = tmp_path / "q.csv"
    qubits.write_text('qubit,t1_us\n"q(0, 1)",50\n')
    imported = import_tables([str(gates), str(qubits)], circuit=str(circuit))
    assert imported.data["gates"]["cz"] == {"q(0, 0),q(0, 1)": {"cphase": 0.01}}
    assert "q(0, 1)" in imported.data["qubits"]
    assert imported.off_circuit == ()


def test_sweep_refuses_values_beyond_the_engines_range(tmp_path):
    # Twenty x pulses sharing one over-rotation ε ~ N(0, 0.1²): the error is Rx(20ε), process
    # infidelity sin²(10ε), mean (1 - E[cos 20ε])/2 = (1 - exp(-200σ²))/2 = (1 - e^{-2})/2 (issue 15's
    # closed form with N = 20). A first-order engine is far outside its range here; the analysis
    # shows no value, so the sweep must not report a clipped 1 for every draw.
    from budget.analysis.sweep import sweep
    from budget.problems import InputError

    circuit = tmp_path / "c.qasm"
    circuit.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\n' + "x q[0];\n" * 20)
    model = {"gates": {"x": {"duration_ns": 40.0, "overrotation": {"value": 0.0, "sigma": 0.1}}}}
    lossy = {**model, "qubits": {"t1_us": 1.0, "t2_us": 1.0}}  # 20 × 40 ns at T1 = 1 µs: far past first order
    with pytest.raises(InputError, match=r"of 30 drawn models are beyond the first-order range of the generators"):
        sweep(circuit, lossy, samples=30, sobol_base=0, workers=1, engine="generators")
    exact = sweep(circuit, model, samples=400, sobol_base=0, workers=1, engine="exact")
    assert abs(exact.now.mean - (1 - math.exp(-2)) / 2) < 4 * exact.now.mean_stderr


def test_compensate_beyond_range_shows_no_clipped_value(tmp_path):
    # twenty 200 ns pulses at T1 = T2 = 1 µs: 4 µs of decay, e^{-4} of the excited population left,
    # far beyond first order (its linear sum of incoherent errors exceeds 1), so the generators engine has no
    # value; the views must say so instead of printing a clipped 1 or a first-order "infidelity" > 1
    from budget.analysis.compensate import compensate

    circuit = tmp_path / "c.qasm"
    circuit.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\n' + "x q[0];\nz q[0];\n" * 10)
    model = {"qubits": {"t1_us": 1.0, "t2_us": 1.0},
             "gates": {"x": {"duration_ns": 200.0, "z_phase": 0.05}, "z": {"duration_ns": 200.0}}}
    result = compensate(circuit, model, engine="generators")
    assert result.before is None and result.after is None and result.to_dict()["before"]["infidelity"] is None
    m = tmp_path / "m.toml"
    m.write_text('[qubits]\nt1_us = 1.0\nt2_us = 1.0\n[gates.x]\nduration_ns = 200.0\nz_phase = 0.05\n'
                 '[gates.z]\nduration_ns = 200.0\n')
    res = runner.invoke(app, ["compensate", str(circuit), "-e", str(m), "--engine", "generators", "--width", "120"])
    assert res.exit_code == 0, res.output
    assert "beyond range" in res.output and "1.000e+00" not in res.output
