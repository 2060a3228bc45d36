"""`budget model import`: measured tables in, a TOML model out that the loader reads back.

Outside references: cirq's depolarizing channels and density-matrix simulator for the error-measure
conversions (Nielsen, Phys. Lett. A 303, 249 (2002); Magesan, Gambetta, Emerson, PRL 106, 180504
(2011)); unit factors are SI (common practice, no source). All tables are invented.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import cirq
import numpy as np
import pytest
from typer.testing import CliRunner

from budget.calibdata.importer import import_tables, to_toml
from budget.calibdata.units import clifford_to_gate, pauli_to_average
from budget.cli import app
from budget.errors.model import ErrorModel, load_model
from budget.problems import ModelError

ROOT = Path(__file__).resolve().parent.parent
DATA = ROOT / "circuits" / "calibration"
runner = CliRunner()


def write(tmp_path: Path, name: str, text: str) -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def roundtrip(imported) -> ErrorModel:
    return ErrorModel.from_dict(tomllib.loads(to_toml(imported)), source="written")


# ---- conversions checked against cirq ----

@pytest.mark.parametrize("n", [1, 2])
def test_pauli_error_to_average_infidelity_against_cirq(n):
    # A depolarizing channel with total Pauli error p (cirq.depolarize) has the same fidelity on every
    # pure input, so one input's fidelity is the average gate fidelity (Nielsen 2002).
    p = 0.012
    qs = cirq.LineQubit.range(n)
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(cirq.Circuit(cirq.depolarize(p, n_qubits=n).on(*qs))).final_density_matrix
    assert 1 - rho[0, 0].real == pytest.approx(pauli_to_average(p, n), rel=1e-6)


@pytest.mark.parametrize("g", [2, 3])
def test_error_per_clifford_to_per_gate_against_cirq(g):
    # g depolarizing gates in a row (cirq) make one "Clifford"; its error converts back to one gate's.
    r_gate = 0.004
    p = 1.5 * r_gate  # cirq.depolarize(p): Pauli error p, average infidelity 2p/3 (d = 2)
    q = cirq.LineQubit(0)
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(cirq.Circuit([cirq.depolarize(p).on(q)] * g)).final_density_matrix
    r_clifford = 1 - rho[0, 0].real
    assert clifford_to_gate(r_clifford, 1, g) == pytest.approx(r_gate, rel=1e-6)
    assert clifford_to_gate(r_clifford, 1, g) != pytest.approx(r_clifford / g, rel=1e-6)  # not the linear guess


# ---- the invented lab's tables ----

def test_csv_tables_reproduce_the_hand_written_model():
    imported = import_tables([DATA / "fen_q8_qubits.csv", DATA / "fen_q8_gates.csv"])
    model = roundtrip(imported)
    hand = load_model(ROOT / "circuits" / "fen_q8.toml")
    assert model.qubit_defaults == hand.qubit_defaults
    assert dict(model.qubit_overrides) == dict(hand.qubit_overrides)
    assert model.gates.keys() == hand.gates.keys()
    for g in hand.gates:  # cz's avg_infidelity comes from a Pauli error, converted (float rounding)
        for f in ("duration_ns", "avg_infidelity", "overrotation", "cphase", "swap_angle", "z_phase"):
            mine, theirs = getattr(model.gates[g], f), getattr(hand.gates[g], f)
            assert mine == theirs if theirs is None else mine == pytest.approx(theirs, rel=1e-12), (g, f)
    assert model.gate("cz", ("q[2]", "q[1]")).cphase == 0.025


def test_every_example_table_imports_and_reads_back():
    files = sorted(DATA.iterdir())
    assert {f.suffix for f in files} >= {".csv", ".json"}
    for f in files:
        model = roundtrip(import_tables([f]))
        assert model.qubit_overrides or model.gates or model.gate_overrides, f


def test_backend_properties_units_and_skips():
    imported = import_tables([DATA / "fen_q8_backend.json"])
    model = roundtrip(imported)
    assert model.qubit("q[1]").t1_us == pytest.approx(121.0)  # 0.000121 s
    assert model.gate("sx", ("q[1]",)).duration_ns == pytest.approx(24.0)  # 0.024 us
    assert model.gate("cz", ("q[1]", "q[0]")).avg_infidelity == 0.0016  # symmetric gate, either order
    assert any("reset" in s for s in imported.skipped) and any("frequency" in s for s in imported.skipped)
    text = to_toml(imported)
    assert "0.000121 s -> 121 µs" in text


def test_calibration_metrics_names_grid_qubits_like_the_cirq_reader():
    model = roundtrip(import_tables([DATA / "fen_q8_metrics.json"]))
    q00, q01 = cirq.GridQubit(0, 0), cirq.GridQubit(0, 1)
    assert model.qubit(str(q00)).readout_error == pytest.approx((0.008 + 0.018) / 2)
    assert model.gate("sx", (str(q01),)).avg_infidelity == pytest.approx(0.0003 * 2 / 3)
    assert model.gate("cz", (str(q00), str(q01))).avg_infidelity == pytest.approx(0.005 * 4 / 5)


def test_rows_off_the_circuit_are_reported_and_kept(tmp_path):
    q = write(tmp_path, "q.csv", "qubit,t1_us\nq[0],100\nq[9],90\n")
    g = write(tmp_path, "g.csv", "gate,qubits,cphase\ncz,q[0] q[4],0.01\ncz,q[1] q[0],0.02\n")
    imported = import_tables([q, g], circuit=ROOT / "circuits" / "parity_cycle.qasm")
    assert any("q.csv row 3" in s and "q[9]" in s for s in imported.off_circuit)
    assert any("g.csv row 2" in s and "never applies cz to q[0],q[4]" in s for s in imported.off_circuit)
    assert not any("row 3" in s for s in imported.off_circuit if s.startswith("g.csv"))  # cz q[1],q[0] is used
    assert roundtrip(imported).qubit("q[9]").t1_us == 90.0


# ---- messy tables ----

def test_blank_cells_mean_not_given(tmp_path):
    t = write(tmp_path, "q.csv", "qubit,t1_us,t2_us,readout_error\nq[0],100,,\nq[1],,80,0.01\n")
    model = roundtrip(import_tables([t]))
    assert model.qubit("q[0]").t2_us is None and model.qubit("q[0]").readout_error == 0.0
    assert model.qubit("q[1]").t1_us is None and model.qubit("q[1]").t2_us == 80.0


@pytest.mark.parametrize("header,value,expected", [
    ("t1 [ms]", "0.1", 100.0), ("t1 (s)", "1e-4", 100.0), ("T1_ns", "100000", 100.0), ("t1 [µs]", "100", 100.0),
])
def test_units_in_headers(tmp_path, header, expected, value):
    t = write(tmp_path, "q.csv", f"qubit,{header}\nq[0],{value}\n")
    assert roundtrip(import_tables([t])).qubit("q[0]").t1_us == pytest.approx(expected)


def test_angle_and_duration_units(tmp_path):
    t = write(tmp_path, "g.csv", "gate,duration (us),cphase [deg],overrotation\ncz,0.06,1.8,\nsx,0.024,,0.005\n")
    model = roundtrip(import_tables([t]))
    assert model.gates["cz"].duration_ns == pytest.approx(60.0)
    assert model.gates["cz"].cphase == pytest.approx(np.pi / 100)


def test_unit_that_does_not_fit_is_refused(tmp_path):
    t = write(tmp_path, "q.csv", "qubit,t1 [rad]\nq[0],1\n")
    with pytest.raises(ModelError, match=r"q.csv:1: column 't1 \[rad\]': unit 'rad' does not fit t1_us"):
        import_tables([t])


def test_extra_columns_are_listed_misspelt_ones_refused(tmp_path):
    t = write(tmp_path, "q.csv", "qubit,t1_us,frequency_ghz\nq[0],100,5.1\n")
    assert import_tables([t]).skipped == ("q.csv: column 'frequency_ghz' ignored (not a model key)",)
    t = write(tmp_path, "q2.csv", "qubit,t1_us,readout_eror\nq[0],100,0.01\n")
    with pytest.raises(ModelError, match="q2.csv:1: column 'readout_eror' is not a model key; did you mean 'readout_error'"):
        import_tables([t])


def test_duplicate_rows_are_refused(tmp_path):
    t = write(tmp_path, "q.csv", "qubit,t1_us\nq[0],100\nq[1],90\nq[0],100\n")
    with pytest.raises(ModelError, match=r"q.csv row 4: repeats the qubit q\[0\] of row 2 \(duplicate rows\)"):
        import_tables([t])


@pytest.mark.parametrize("first,second,message", [
    # the same value in two files
    ("qubit,t1_us\nq[0],100\n", "qubit,t1_us\nq[0],101\n",
     r'qubits."q\[0\]".t1_us = 101.0 in b.csv row 2: given twice, also in a.csv row 2'),
    # a rule spanning files, checked after merging
    ("qubit,t1_us\nq[0],40\n", "qubit,t2_us\nq[0],100\n",
     r'qubits."q\[0\]".t2_us = 100.0 in a.csv \+ b.csv: needs T2 <= 2·T1'),
])
def test_two_files_merged(tmp_path, first, second, message):
    a, b = write(tmp_path, "a.csv", first), write(tmp_path, "b.csv", second)
    with pytest.raises(ModelError, match=message):
        import_tables([a, b])


def test_comma_decimal_separators_are_refused(tmp_path):
    t = write(tmp_path, "q.csv", "qubit;t1_us;readout_error\nq[0];100;0,012\n")
    with pytest.raises(ModelError, match=r"q.csv row 2, column 'readout_error': '0,012' uses a comma as decimal separator; write 0.012"):
        import_tables([t])
    t = write(tmp_path, "q2.csv", 'qubit,t1_us\nq[0],"100,5"\n')
    with pytest.raises(ModelError, match="comma as decimal separator"):
        import_tables([t])
    t = write(tmp_path, "q3.csv", "qubit,t1_us\nq[0],100,5\n")
    with pytest.raises(ModelError, match=r"q3.csv row 2: 3 cells but 2 columns .*comma used as decimal separator"):
        import_tables([t])


@pytest.mark.parametrize("row,message", [
    ("q[1],-5,", r'qubits."q\[1\]".t1_us = -5.0 in q.csv row 2: must be positive \(microseconds\)'),
    ("q[1],50,120", r'qubits."q\[1\]".t2_us = 120.0 in q.csv row 2: needs T2 <= 2·T1'),
    ("q[1],abc,", r"qubits.\"q\[1\]\".t1_us = 'abc' in q.csv row 2: expected a number \(microseconds\)"),
])
def test_bad_values_get_the_model_messages_with_file_and_row(tmp_path, row, message):
    t = write(tmp_path, "q.csv", f"qubit,t1_us,t2_us\n{row}\n")
    with pytest.raises(ModelError, match=message):
        import_tables([t])


def test_pauli_error_and_clifford_columns(tmp_path):
    t = write(tmp_path, "g.csv", "gate,pauli_error\ncz,0.01\nsx,0.003\n")
    model = roundtrip(import_tables([t]))
    assert model.gates["cz"].avg_infidelity == pytest.approx(0.008) and model.gates["sx"].avg_infidelity == pytest.approx(0.002)
    t = write(tmp_path, "c.csv", "gate,error_per_clifford\nsx,0.00375\n")
    with pytest.raises(ModelError, match="--gates-per-clifford"):
        import_tables([t])
    model = roundtrip(import_tables([t], gates_per_clifford=1.875))
    assert model.gates["sx"].avg_infidelity == pytest.approx(clifford_to_gate(0.00375, 1, 1.875))


def test_unknown_gate_row(tmp_path):
    t = write(tmp_path, "g.csv", "gate,duration_ns\ncz,60\nczz,60\n")
    with pytest.raises(ModelError, match="g.csv row 3: gate 'czz' is not in the gate table; did you mean 'cz'"):
        import_tables([t])


# ---- the command ----

def test_cli_writes_a_model_the_loader_reads(tmp_path):
    out = tmp_path / "m.toml"
    res = runner.invoke(app, ["model", "import", str(DATA / "fen_q8_qubits.csv"), str(DATA / "fen_q8_gates.csv"),
                              "--out", str(out), "--circuit", str(ROOT / "circuits" / "parity_cycle.qasm"),
                              "--width", "200"])
    assert res.exit_code == 0, res.output
    assert "column 'frequency_ghz' ignored" in res.output
    model = load_model(out)
    assert model.qubit("q[3]").t1_us == 55.0
    assert "# fen_q8_qubits.csv row 2, t1 [ms] (ms × 1000)" in out.read_text()


def test_cli_bad_table_one_line_exit_2_no_file(tmp_path):
    t = write(tmp_path, "q.csv", "qubit,t1_us\nq[0],-1\n")
    out = tmp_path / "m.toml"
    res = runner.invoke(app, ["model", "import", str(t), "--out", str(out)])
    assert res.exit_code == 2
    assert "q.csv row 2" in res.output and "Traceback" not in res.output
    assert not out.exists()


def test_json_that_is_neither_layout(tmp_path):
    t = write(tmp_path, "x.json", json.dumps({"hello": 1}))
    with pytest.raises(ModelError, match="x.json: not a known calibration layout"):
        import_tables([t])


def test_sigma_and_drift_columns_become_uncertainty_tables(tmp_path):
    t = write(tmp_path, "g.csv", "gate,cphase,cphase_sigma,cphase_drift_per_hour,duration_ns\ncz,0.03,0.004,0.002,60\n")
    text = to_toml(import_tables([t]))
    assert "cphase = {value = 0.03, sigma = 0.004, drift_per_hour = 0.002}" in text.replace("  ", " ")
    model = ErrorModel.from_dict(tomllib.loads(text))
    assert model.gates["cz"].cphase == 0.03
    (spread,) = model.uncertain
    assert (spread.sigma, spread.drift_per_hour) == (0.004, 0.002)
