"""depth, tolerances, cost and report on circuits with mid-circuit measurement (issue 13).

Reference for the quadratic form: first principles (derived in the test). The other checks tie
the commands to the detector metric already checked against cirq and stim
(tests/test_measured_exact.py, tests/test_measured_frames.py).
"""

from __future__ import annotations

import math

import pytest

from budget.analysis.depth import depth_curve
from budget.analysis.measured import analyze_measured
from budget.analysis.sensitivity import quadratic_form
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import InputError
from budget.report.content import gather
from budget.report.render import report_files

from test_measured_frames import REPETITION



def test_detector_quadratic_form_from_first_principles():
    """Only an over-rotation ε per x: per round each of the 3 data qubits flips with sin²ε ≈ ε²
    (the x pair rotates by 2ε), and any flip fires a detector of that round; to leading order
    P(some detector fires) = 3 R ε², so A_xx = 3 R per rad² and there is no floor."""
    rounds = 3
    circuit = parse_qasm(REPETITION.format(last=rounds - 1))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.01}}}))
    qf = quadratic_form(noisy, "detectors")
    assert qf.labels == (("x", "overrotation"),)
    assert qf.matrix[0, 0] == pytest.approx(3 * rounds, rel=2e-3)
    assert abs(qf.floor) < 1e-12 and qf.values_rad[0] == pytest.approx(0.01)
    exact = analyze_measured(noisy, circuit, metric="detectors").actual_infidelity
    assert exact == pytest.approx(qf.matrix[0, 0] * 0.01**2, rel=2e-2)  # leading order at ε = 0.01


def test_depth_curve_of_detectors():
    circuit = parse_qasm(REPETITION.format(last=1))
    model = ErrorModel.from_dict({"qubits": {"readout_error": 0.01}, "gates": {"x": {"overrotation": 0.02}}})
    block = attach(circuit, model)
    curve = depth_curve(block, max_cycles=3, points=3, metric="detectors")
    assert curve.repetitions == (1, 2, 3)
    one = analyze_measured(block, circuit, metric="detectors").actual_infidelity
    assert curve.structured[0] == pytest.approx(one, rel=1e-12)
    assert list(curve.structured) == sorted(curve.structured)  # more rounds, more chances to fire
    # naive: 1 - (1 - e1)^N with e1 the one-round fidelity product
    e1 = curve.naive[0]
    assert curve.naive[2] == pytest.approx(1 - (1 - e1) ** 3)


def test_report_has_the_detector_map(tmp_path):
    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=1))
    model = {"qubits": {"readout_error": 0.01, "reset_error": 0.002},
             "gates": {"x": {"overrotation": 0.02, "duration_ns": 20.0}, "cx": {"avg_infidelity": 0.003}}}
    data = gather(str(path), model, target=0.2, metric="detectors", max_cycles=2, points=2)
    files = report_files(data)
    assert "detector-map.svg" in files and "Which checks fire" in files["report.md"]
    assert data.tolerances is not None
    assert math.isclose(sum(f.share for f in data.result.families), data.result.actual_infidelity, rel_tol=1e-9)


def test_folded_repeat_equals_unrolled_frames():
    """A repetition-code memory of 70 rounds (above the folding threshold) folded from 5 and 6
    iterations gives the same detectors and probabilities as the frame path on the whole circuit
    (stim's detector error model of the unrolled record)."""
    from budget.analysis.detectors import infer_checks
    from budget.analysis.folding import FOLD_AT, fold_target, folded_frames
    from budget.engines.clifford.frames import frames

    rounds = FOLD_AT + 6
    circuit = parse_qasm(REPETITION.format(last=rounds - 1))
    model = ErrorModel.from_dict({"qubits": {"readout_error": 0.01, "reset_error": 0.003, "t1_us": 50.0},
                                  "gates": {"x": {"overrotation": 0.02, "duration_ns": 20.0},
                                            "cx": {"avg_infidelity": 0.004, "duration_ns": 40.0},
                                            "measure": {"duration_ns": 300.0}}})
    noisy = attach(circuit, model)
    index = fold_target(noisy)
    assert index is not None
    folded = folded_frames(noisy, index)
    checks = infer_checks(noisy)
    whole = frames(noisy, tuple(d.measurements for d in checks.detectors), coherent=True)
    ref = {d.measurements: (d.round, p) for d, p in zip(checks.detectors, whole.detector_probability)}
    assert len(folded.detectors) == len(ref) == 2 * rounds + 2
    for d in folded.detectors:
        assert ref[d.measurements][0] == d.round
        assert d.probability == pytest.approx(ref[d.measurements][1], rel=1e-12)
    assert folded.any_fires == pytest.approx(whole.any_fires, rel=1e-9)
    for fam, part in whole.any_families.items():
        assert folded.any_families[fam] == pytest.approx(part, rel=1e-6)
    assert folded.logical == checks.observables


def test_quadratic_form_on_one_detector():
    """The check Z0Z2 compares two data qubits, each flipped with sin²ε ≈ ε² per round by the
    over-rotated x pair: its detector of round 1 fires with 2ε² to leading order, so A_xx = 2."""
    circuit = parse_qasm(REPETITION.format(last=2))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.01}}}))
    listed = analyze_measured(noisy, circuit, metric="detectors").detectors
    k = next(i for i, d in enumerate(listed) if d.round == 1)
    qf = quadratic_form(noisy, "detectors", detector=k)
    assert qf.matrix[0, 0] == pytest.approx(2.0, rel=2e-3)
    with pytest.raises(InputError, match="detectors 0 to"):
        quadratic_form(noisy, "detectors", detector=len(listed))
    with pytest.raises(InputError, match="needs the detectors metric"):
        quadratic_form(noisy, "process", detector=0)


def test_randomised_companions_refuse_measurement_items(tmp_path):
    from typer.testing import CliRunner

    from budget.cli import app

    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=1))
    model = tmp_path / "m.toml"
    model.write_text("[gates.x]\noverrotation = 0.01\n")
    for extra in (["--ensemble", "2"], ["--against", "random"]):
        res = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "detectors", *extra])
        assert res.exit_code == 2 and "gate-only circuits" in res.output and "Traceback" not in res.output


def test_tolerances_and_cost_refuse_the_record_metric_in_one_line(tmp_path):
    """The record metric has no quadratic form: tolerances and cost say so in the user's terms
    (not an engine's internal list of metrics), exit code 2, one line."""
    from typer.testing import CliRunner

    from budget.cli import app

    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=1))
    model = tmp_path / "m.toml"
    model.write_text("[gates.x]\noverrotation = 0.01\n")
    for command in ("tolerances", "cost"):
        res = CliRunner().invoke(app, [command, str(path), "-e", str(model), "--metric", "record", "-t", "0.01"])
        assert res.exit_code == 2 and "Traceback" not in res.output
        assert "record" in res.output and "--metric detectors" in res.output
        assert "is not one of process, state" not in res.output


def test_depth_note_of_the_record_metric_names_no_detectors():
    """The record metric compares whole records: its depth note must not claim detectors are inferred."""
    circuit = parse_qasm(REPETITION.format(last=0))
    block = attach(circuit, ErrorModel.from_dict({"qubits": {"readout_error": 0.01}}))
    record = depth_curve(block, max_cycles=2, points=2, metric="record")
    assert not any("detector" in w for w in record.warnings)
    detectors = depth_curve(block, max_cycles=2, points=2, metric="detectors")
    assert any("detectors inferred anew" in w for w in detectors.warnings)
    # readout only, one record bit flipped independently per measurement (closed form, no source
    # needed): the record of N rounds keeps all 5N bits with (1 - p)^(5N), so 1 - classical fidelity
    # of the record is 1 - (1 - p)^(5N) at N = 2
    assert record.structured[-1] == pytest.approx(1 - 0.99 ** 10, rel=1e-9)


FINAL_ONLY = """OPENQASM 3;
include "stdgates.inc";
qubit[2] q;
bit[2] c;
h q[0];
cx q[0], q[1];
c[0] = measure q[0];
c[1] = measure q[1];
"""


@pytest.mark.parametrize("metric", ["record", "detectors"])
def test_measured_metrics_refuse_a_circuit_whose_only_measurements_end_it(tmp_path, metric):
    """Final measurements are readout, kept apart: the record is empty. Before, the record metric
    reported an actual infidelity of 0 beside a non-zero fidelity product ("cancellation ... 0x") and
    the detector metric said "the circuit measures nothing"."""
    from typer.testing import CliRunner

    from budget.cli import app

    path = tmp_path / "bell.qasm"
    path.write_text(FINAL_ONLY)
    model = tmp_path / "m.toml"
    model.write_text("[qubits]\nreadout_error = 0.02\n[gates.h]\noverrotation = 0.05\n")
    noisy = attach(parse_qasm(FINAL_ONLY), ErrorModel.from_dict({"gates": {"h": {"overrotation": 0.05}}}))
    with pytest.raises(InputError, match=f"the {metric} metric needs measurements inside the circuit"):
        analyze_measured(noisy, parse_qasm(FINAL_ONLY), metric=metric)
    with pytest.raises(InputError, match="needs measurements inside the circuit"):
        depth_curve(noisy, max_cycles=2, points=2, metric=metric)
    for args in (["analyze"], ["depth", "--max-cycles", "2"], ["report", "-t", "0.1", "--out", str(tmp_path / "r")]):
        res = CliRunner().invoke(app, [*args, str(path), "-e", str(model), "--metric", metric, "-q"])
        assert res.exit_code == 2 and "Traceback" not in res.output and "measurements inside" in res.output
    assert not (tmp_path / "r").exists()  # no partial report


def test_report_and_terminal_say_the_same_about_a_readout_only_product(tmp_path):
    """Readout errors only: the fidelity product of the detector metric is 1 - (1 - p)^M over the M
    recorded bits (closed form, no source needed). The report's tile must say what the terminal
    says (readouts are in it), and a floor made of readout errors must not be blamed on T1, T2 and
    gate error rates alone."""
    from rich.console import Console

    from budget.report.terminal import summary_table

    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=1))
    p = 0.05
    data = gather(str(path), {"qubits": {"readout_error": p}}, target=0.01, metric="detectors", max_cycles=2,
                  points=2)
    recorded = 2 * 2 + 3  # two ancilla bits per round, two rounds, three data bits
    assert data.result.naive_infidelity == pytest.approx(1 - (1 - p) ** recorded, rel=1e-12)
    md = report_files(data)["report.md"]
    console = Console(width=200, record=True)
    console.print(summary_table(data.result))
    terminal = console.export_text()
    assert "readouts and resets" in terminal
    row = next(line for line in md.splitlines() if line.startswith("| fidelity product (naive)"))
    assert "readouts and resets" in row
    assert "readout and reset errors" in md


X_PAIRS = """OPENQASM 3;
include "stdgates.inc";
qubit[1] q;
bit[2] c;
x q[0]; x q[0];
c[0] = measure q[0];
reset q[0];
x q[0]; x q[0];
c[1] = measure q[0];
"""


def test_record_metric_compares_the_twirled_circuit_when_asked():
    """x with over-rotation ε is R_x(π + ε) (docs/error-model.md). Closed forms (derived here):
    coherent, the pair is -R_x(2ε) and flips the qubit with sin²ε, so the ideal record 00 survives
    with cos⁴ε; twirled, each x flips independently with p = sin²(ε/2), a round flips with
    q = 2p(1 - p), and the record survives with (1 - q)²."""
    from budget.analysis.run import analyze

    eps = 0.1
    model = {"gates": {"x": {"overrotation": eps}}}
    result = analyze(parse_qasm(X_PAIRS), model, metric="record", compare_twirled=True)
    assert result.actual_infidelity == pytest.approx(1 - math.cos(eps) ** 4, rel=1e-9)
    p = math.sin(eps / 2) ** 2
    assert result.twirled_infidelity == pytest.approx(1 - (1 - 2 * p * (1 - p)) ** 2, rel=1e-9)
    assert analyze(parse_qasm(X_PAIRS), model, metric="record").twirled_infidelity is None


def test_measured_metrics_refuse_pauli_observables_and_keep_model_warnings():
    from budget.analysis.run import analyze

    with pytest.raises(InputError, match="--observable Z0: .* the record metric has none"):
        analyze(parse_qasm(X_PAIRS), {"gates": {"x": {"overrotation": 0.01}}}, metric="record", observables=("Z0",))
    # 0.7 rad is above the model's unusual-angle threshold: its warning reaches the measured result too
    result = analyze(parse_qasm(X_PAIRS), {"gates": {"x": {"overrotation": 0.7}}}, metric="record")
    assert any("gates.x.overrotation = 0.7 rad" in w for w in result.warnings)


@pytest.mark.parametrize("metric", ["process", "record"])
def test_logical_observables_are_refused_outside_the_detectors_metric(metric):
    from budget.analysis.run import analyze

    text = X_PAIRS if metric == "record" else 'OPENQASM 3;\ninclude "stdgates.inc";\nqubit[1] q;\nx q[0];\n'
    with pytest.raises(InputError, match=f"--logical: .* the {metric} metric does not use them"):
        analyze(parse_qasm(text), {"gates": {"x": {"overrotation": 0.01}}}, metric=metric, logical=((0,),))


FEED_FORWARD = """OPENQASM 3;
include "stdgates.inc";
qubit[2] q;
bit[2] c;
h q[0];
c[0] = measure q[0];
if (c[0] == 1) x q[1];
c[1] = measure q[1];
"""


@pytest.mark.parametrize("misread, expected", [("q[1]", 0.1), ("q[0]", 0.0)])
def test_record_metric_feeds_the_misread_bit_forward(misread, expected):
    """Closed form (derived here): the ideal record is 00 or 11 with 1/2 each. A misread of the last
    bit (probability p) breaks the pair: F = 1 - p. A misread of c[0] drives the x with the wrong
    bit, so the pair stays equal and the record keeps fidelity 1."""
    from budget.analysis.run import analyze

    result = analyze(parse_qasm(FEED_FORWARD), {"qubits": {misread: {"readout_error": 0.1}}}, metric="record")
    assert result.actual_infidelity == pytest.approx(expected, abs=1e-12)


def test_too_many_detector_knobs_names_the_cli_option(tmp_path):
    """stim's rotated surface code (d = 3) with a z_phase per cx pair has more knobs than the
    detector form takes: the refusal names the option to drop, not an internal parameter."""
    import stim
    from typer.testing import CliRunner

    from budget.cli import app

    circuit = stim.Circuit.generated("surface_code:rotated_memory_z", distance=3, rounds=2)
    path = tmp_path / "sc.qasm"
    path.write_text(circuit.to_qasm(open_qasm_version=3, skip_dets_and_obs=True))
    model = tmp_path / "m.toml"
    model.write_text("[gates.cx]\nz_phase = [0.01, -0.02]\n")
    res = CliRunner().invoke(app, ["tolerances", str(path), "-e", str(model), "--metric", "detectors", "-t", "0.1",
                                   "--by-pair"])
    assert res.exit_code == 2 and "Traceback" not in res.output
    assert "--by-pair" in res.output and "family_by" not in res.output
