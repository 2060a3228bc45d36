"""Detector budgets against stim's detector error model, and the projected coherent error (issue 13).

References:
- stim (Gidney, Quantum 5, 497 (2021)): its generator writes repetition- and surface-code memory
  circuits with its own noise (depolarizing after Cliffords, flips before measurement and after
  reset) and its detector error model lists every mechanism; the firing probability of a detector
  is (1 - Π (1 - 2 p_m)) / 2 over the mechanisms that flip it.
- First principles for the repetition code with an over-rotated x pair per round (derived in the
  test): the checks project the coherent error every round.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import stim
from typer.testing import CliRunner

from budget.analysis.detectors import infer_checks
from budget.analysis.measured import analyze_measured
from budget.circuit.qasm import parse_qasm
from budget.cli import app
from budget.engines.exact.branches import Plan, condition_bits, simulate
from budget.engines.clifford.frames import frames
from budget.errors.attach import attach
from budget.errors.model import ErrorModel


def stim_detector_probabilities(circuit: stim.Circuit) -> dict[frozenset[int], float]:
    """Detector (as its absolute record indices) -> firing probability from stim's own model."""
    count, dets = 0, []
    for inst in circuit.flattened():
        if inst.name in ("M", "MR", "MX", "MRX"):
            count += len(inst.targets_copy())
        elif inst.name == "DETECTOR":
            dets.append(frozenset(count + t.value for t in inst.targets_copy()))
    keep = np.zeros(len(dets))
    for inst in circuit.detector_error_model(approximate_disjoint_errors=True).flattened():
        if inst.type == "error":
            p = inst.args_copy()[0]
            for t in inst.targets_copy():
                if t.is_relative_detector_id():
                    keep[t.val] += math.log1p(-2 * p)
    return {d: (1 - math.exp(k)) / 2 for d, k in zip(dets, keep)}


def matching_model(p: float) -> dict:
    """Our error model for stim's after_clifford_depolarization = before_measure_flip = after_reset_flip = p.

    stim's DEPOLARIZE1(p) applies each Pauli with p/3 and DEPOLARIZE2(p) each of 15 with p/15; ours
    applies each Pauli with λ/d² where λ = r d/(d-1) (r the average infidelity), so r = 2p/3 for one
    qubit and r = 4p/5 for two."""
    return {
        "qubits": {"readout_error": p, "reset_error": p},
        "gates": {"h": {"avg_infidelity": 2 * p / 3}, "cx": {"avg_infidelity": 4 * p / 5}},
    }


@pytest.mark.parametrize(
    "code, distance, rounds",
    [("repetition_code:memory", 3, 4), ("surface_code:rotated_memory_z", 3, 3), ("surface_code:rotated_memory_z", 5, 2)],
)
def test_frames_match_stims_detector_error_model(code, distance, rounds):
    """(memory_x is left out: its OpenQASM writes stim's MX/RX as H + measure/reset + H, and those H
    gates carry our h error, which stim's MX/RX do not.) stim splits DEPOLARIZE2 into independent
    mechanisms exactly while our twirled channels are written as PAULI_CHANNEL_2 with disjoint
    probabilities read as independent: the two agree to first order (relative O(p))."""
    p = 2e-3
    gen = stim.Circuit.generated(code, distance=distance, rounds=rounds, after_clifford_depolarization=p,
                                 before_measure_flip_probability=p, after_reset_flip_probability=p)
    text = gen.without_noise().to_qasm(open_qasm_version=3, skip_dets_and_obs=True)
    noisy = attach(parse_qasm(text, source="gen.qasm"), ErrorModel.from_dict(matching_model(p)))
    checks = infer_checks(noisy)
    ours = frames(noisy, tuple(d.measurements for d in checks.detectors))
    theirs = stim_detector_probabilities(gen)
    assert len(theirs) == len(checks.detectors)
    for d, prob in zip(checks.detectors, ours.detector_probability):
        assert prob == pytest.approx(theirs[frozenset(d.measurements)], rel=1e-3)
    # family shares add up to each detector's probability
    for prob, fams in zip(ours.detector_probability, ours.detector_families):
        assert sum(fams.values()) == pytest.approx(prob, rel=1e-9)


def test_exact_engine_matches_stim_to_first_order():
    """Pauli channels only: the exact branches and stim's model agree up to O(p²)."""
    p = 1e-4
    gen = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=2, after_clifford_depolarization=p,
                                 before_measure_flip_probability=p, after_reset_flip_probability=p)
    text = gen.without_noise().to_qasm(open_qasm_version=3, skip_dets_and_obs=True)
    noisy = attach(parse_qasm(text), ErrorModel.from_dict(matching_model(p)))
    checks = infer_checks(noisy)
    plan = Plan(tuple(d.measurements for d in checks.detectors), tuple(d.ideal for d in checks.detectors), False,
                tuple(condition_bits(noisy.body)), checks.num_measurements)
    exact = simulate(noisy, plan)
    theirs = stim_detector_probabilities(gen)
    for d, prob in zip(checks.detectors, exact.detector_probability):
        ref = theirs[frozenset(d.measurements)]
        assert abs(prob - ref) < 20 * p * p, (d, prob, ref)


REPETITION = """OPENQASM 3;
include "stdgates.inc";
qubit[5] q;
bit[2] a;
bit[3] d;
for int r in [0:{last}] {{
  x q[0]; x q[2]; x q[4];
  x q[0]; x q[2]; x q[4];
  cx q[0], q[1]; cx q[2], q[3];
  cx q[2], q[1]; cx q[4], q[3];
  a[0] = measure q[1]; a[1] = measure q[3];
  reset q[1]; reset q[3];
}}
d[0] = measure q[0]; d[1] = measure q[2]; d[2] = measure q[4];
"""


def test_checks_project_the_coherent_error_of_an_x_pair():
    """Each data qubit gets x·x per round (ideal identity) with over-rotation ε per x.

    First principles: x with over-rotation ε is R_x(π + ε); the pair is R_x(2π + 2ε) = -R_x(2ε),
    which flips a qubit with probability s = sin²(ε). The checks Z0Z2 and Z2Z4 are measured every
    round; after the measurement the data are (up to amplitudes O(ε³)) in a computational basis
    state, so in each round each data qubit flips independently with probability s and a check
    changes value (its detector fires) with probability 2 s (1 - s), the same in every round.
    Without the checks the rotation would add up coherently: after N rounds a data qubit would be
    flipped with probability sin²(N ε).
    """
    eps = 0.05
    rounds = 4
    circuit = parse_qasm(REPETITION.format(last=rounds - 1), source="rep.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": eps}}}))
    result = analyze_measured(noisy, circuit, metric="detectors", engine="exact")
    s = math.sin(eps) ** 2
    expected = 2 * s * (1 - s)
    by_round: dict[int, list[float]] = {}
    for d in result.detectors:
        by_round.setdefault(d.round, []).append(d.probability)
    for r in range(rounds):
        assert by_round[r] == pytest.approx([expected] * 2, rel=1e-3)
    assert max(by_round[rounds]) < 1e-6  # the final data agree with the last check round
    # far below the unprojected build-up of the last round's flip probability
    assert by_round[rounds - 1][0] < 0.1 * math.sin(rounds * eps) ** 2 * 2
    # every detector's share is the x family's
    assert all(set(d.families) == {"x"} for d in result.detectors if d.probability > 1e-6)


def test_cli_detectors_and_record_json(tmp_path):
    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=2))
    model = tmp_path / "lab.toml"
    model.write_text('[qubits]\nreadout_error = 0.01\nreset_error = 0.002\nt1_us = 80.0\n'
                     '[gates.x]\nduration_ns = 20.0\noverrotation = 0.03\n[gates.cx]\nduration_ns = 40.0\n'
                     'avg_infidelity = 0.004\n[gates.measure]\nduration_ns = 400.0\n[gates.reset]\nduration_ns = 100.0\n')
    out = tmp_path / "out.json"
    res = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "detectors", "--json", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["metric"] == "detectors" and data["engine"] == "exact"
    dets = data["detectors"]
    assert len(dets) == 2 * 3 + 2
    assert all(set(d) == {"measurements", "round", "probability", "families"} for d in dets)
    for d in dets:
        assert sum(f["share"] for f in d["families"]) == pytest.approx(d["probability"], rel=1e-9)
    assert sum(f["share"] for f in data["families"]) == pytest.approx(data["actual"]["infidelity"], rel=1e-9)
    # P(some detector fires) is at least the largest single detector and at most their sum
    probs = [d["probability"] for d in dets]
    assert max(probs) <= data["actual"]["infidelity"] <= sum(probs)
    assert data["logical_observables"] and "firing probability by round" in res.output
    bad = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "process", "--json", str(tmp_path / "x.json")])
    assert bad.exit_code == 2 and "rep.qasm:11: measurement" in bad.output and not (tmp_path / "x.json").exists()


IPE = """OPENQASM 3;
include "stdgates.inc";
qubit a;
qubit t;
bit[3] c;
x t;
h a; cp(2*pi*{scale}/8*4) a, t; h a;
c[0] = measure a; reset a;
h a; cp(2*pi*{scale}/8*2) a, t; if (c[0]) {{ p(-pi/2) a; }} h a;
c[1] = measure a; reset a;
h a; cp(2*pi*{scale}/8) a, t; if (c[0]) {{ p(-pi/4) a; }} if (c[1]) {{ p(-pi/2) a; }} h a;
c[2] = measure a;
"""


def test_record_metric_on_iterative_phase_estimation(tmp_path):
    """Kitaev-style iterative phase estimation of the phase 1/8·2π·5 (bits 101, least significant
    first measured): ideal record deterministic; with an over-rotated controlled phase the bits flip.
    Reference for the ideal outcome: the binary expansion of the phase (Kitaev 1995; Dobšíček et
    al., PRA 76, 030306 (2007)); the noisy one is cross-checked with cirq in test_measured_exact."""
    path = tmp_path / "ipe.qasm"
    path.write_text(IPE.format(scale=5))
    model = tmp_path / "m.toml"
    model.write_text("[gates.cp]\noverrotation = 0.05\n[qubits]\nreadout_error = 0.01\n")
    out = tmp_path / "ipe.json"
    res = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "record", "--json", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    bits = {b["index"]: b["flip_probability"] for b in data["record_bits"]}
    assert set(bits) == {0, 1, 2}  # every ideal bit is deterministic
    assert all(0.01 <= v < 0.05 for v in bits.values())
    assert 0 < data["actual"]["infidelity"] < 1
    ideal = attach(parse_qasm(IPE.format(scale=5)), ErrorModel.from_dict({}))
    rec = simulate(ideal, Plan((), (), True, tuple(condition_bits(ideal.body)), 3)).record
    best = max(rec, key=rec.get)
    assert rec[best] == pytest.approx(1.0) and best == 0b101  # c0 = 1, c1 = 0, c2 = 1
