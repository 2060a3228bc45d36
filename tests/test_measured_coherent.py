"""Coherent errors on the Pauli-frame detector path: amplitude classes (issue 13).

References:
- cirq's DensityMatrixSimulator on the deferred-measurement form of each circuit
  (``Deferred`` of tests/test_measured_exact.py: Nielsen & Chuang 2000, §4.4), independent of the
  project's engines, and the exact engine with classical branches.
- First principles, derived beside each check: an x with over-rotation ε is R_x(π + ε), a pair is
  -R_x(2ε) and flips a qubit with probability sin²ε; N pairs on an unmeasured qubit flip it with
  sin²(Nε); twirled, each x flips independently with p = sin²(ε/2) and an odd number of k
  independent flips happens with (1 - (1 - 2p)^k)/2 (common practice, no source).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from typer.testing import CliRunner

from budget.analysis.detectors import infer_checks
from budget.analysis.measured import analyze_measured
from budget.circuit.qasm import parse_qasm
from budget.cli import app
from budget.engines.clifford.coherent import coherent_classes
from budget.engines.clifford.frames import frames
from budget.engines.clifford.stim_circuit import record_qubits
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from tests.test_measured_exact import Deferred
from tests.test_measured_frames import REPETITION


def clifford_program(rng: np.random.Generator, scale: float) -> tuple[str, dict]:
    """A seeded Clifford circuit (2-3 qubits) with mid-circuit measurement, reset, Pauli
    feed-forward and idle x pairs, and a model with coherent knobs of size ~scale on every gate,
    depolarizing, readout and reset errors of size ~scale², and T1/T2 relaxation during h gates and
    measurements (amplitude damping is not a Pauli channel: the jumps are kept at the rate the state
    gives them). The y under an if carries coherent errors (conditioned on the bit); incoherent
    errors of conditioned gates are outside the frame path (stim has no conditioned noise)."""
    n = int(rng.integers(2, 4))
    lines = ["OPENQASM 3;", 'include "stdgates.inc";', f"qubit[{n}] q;", "bit[8] c;"]
    bits = 0

    def gate() -> str:
        q = int(rng.integers(n))
        choice = int(rng.integers(6))
        if choice < 4:
            return f"{['h', 's', 'sx', 'x'][choice]} q[{q}];"
        a, b = rng.choice(n, 2, replace=False)
        return f"{'cx' if choice == 4 else 'cz'} q[{a}], q[{b}];"

    while bits < 5:
        kind = int(rng.integers(7))
        if kind <= 2:
            lines.append(gate())
        elif kind == 3:
            lines.append(f"c[{bits}] = measure q[{int(rng.integers(n))}];")
            bits += 1
        elif kind == 4:
            lines.append(f"reset q[{int(rng.integers(n))}];")
        elif kind == 5 and bits:
            t, u = int(rng.integers(n)), int(rng.integers(n))
            cond = f"c[{int(rng.integers(bits))}]" if rng.random() < 0.5 else f"!c[{int(rng.integers(bits))}]"
            lines.append(f"if ({cond}) {{ y q[{t}]; x q[{t}]; }} else {{ y q[{u}]; }}")
        elif kind == 6:
            q = int(rng.integers(n))
            lines.append(f"x q[{q}]; x q[{q}];")
    lines.append(f"c[7] = measure q[{int(rng.integers(n))}];")

    def g() -> float:
        return float(rng.normal(0, scale))

    t1 = float(rng.uniform(60, 150))  # γ <= 0.5 % per measurement: products of two errors stay below 1 %
    model = {
        "qubits": {"readout_error": float(rng.uniform(0, scale**2)), "reset_error": float(rng.uniform(0, scale**2)),
                   "t1_us": t1, "t2_us": t1 * float(rng.uniform(0.5, 1.5))},
        "gates": {
            "measure": {"duration_ns": 300.0},
            "h": {"overrotation": g(), "avg_infidelity": scale**2 / 3, "duration_ns": 25.0},
            "sx": {"overrotation": g(), "axis_error": g()},
            "x": {"overrotation": g()},
            "y": {"overrotation": g(), "axis_error": g()},  # under the ifs: coherent errors only
            "s": {"z_phase": [g()]},
            "cx": {"overrotation": g(), "cphase": g(), "avg_infidelity": scale**2 / 2},
            "cz": {"cphase": g(), "z_phase": [g(), g()]},
        },
    }
    return "\n".join(lines) + "\n", model


def _cirq_detector_probabilities(noisy, detectors, ideal) -> np.ndarray:
    """P(parity differs from its ideal value) from cirq's record distribution."""
    m = len(record_qubits(noisy))
    dist = Deferred(noisy, m).record_distribution()
    keys = np.arange(2**m)
    out = []
    for ms, value in zip(detectors, ideal):
        mask = sum(1 << i for i in ms)
        odd = np.array([bin(int(k) & mask).count("1") % 2 for k in keys], bool)
        out.append(dist[odd != bool(value)].sum())
    return np.array(out)


def test_amplitude_classes_match_cirq_on_random_clifford_circuits():
    """First order in the amplitudes: within 1 % of cirq's exact detector probabilities plus the
    second-order allowance 2 P(any)² on every detector of 16 seeded circuits, while the twirled
    frame path misses by more than 10 % on many of them (so the comparison can tell the two apart).
    What is left is second order, products of two error events (found by reducing a case: a reset
    error leaves |1>, which then decays during a measurement with γ = 0.5 %, so the detector fires
    with e(1 - γ), not e)."""
    checked, twirl_misses = 0, 0
    for seed in range(16):
        rng = np.random.default_rng(1000 + seed)
        text, model = clifford_program(rng, 0.02)
        noisy = attach(parse_qasm(text, source=f"c{seed}.qasm"), ErrorModel.from_dict(model))
        checks = infer_checks(noisy).detectors
        dets = tuple(d.measurements for d in checks)
        if not dets:
            continue
        ref = _cirq_detector_probabilities(noisy, dets, [d.ideal for d in checks])
        result = frames(noisy, dets, coherent=True)
        ours = np.array(result.detector_probability)
        twirled = np.array(frames(noisy, dets).detector_probability)
        # first order: 1 % of each probability, plus products of two error events, at most P(any)²
        assert np.all(np.abs(ours - ref) <= 0.01 * ref + 2 * result.any_fires**2 + 1e-9), (seed, ours, ref)
        twirl_misses += int(np.sum(np.abs(twirled - ref) > 0.1 * ref))
        checked += len(dets)
    assert checked >= 40 and twirl_misses >= 5


def test_repetition_code_x_pairs_are_projected_every_round():
    """The issue's check. Data qubits get x·x per round with over-rotation ε per x; the checks Z0Z2
    and Z2Z4 are measured and reset every round. First principles: a pair is -R_x(2ε), so each data
    qubit flips with s = sin²ε in each round, independently of the rounds before (the checks project
    the error: the rotation does not carry over), and a check's detector fires with 2 s (1 - s),
    the same in every round; unprojected, a data qubit would be flipped with sin²(Nε) after N rounds.
    Twirled, four independent flips of p = sin²(ε/2) reach a check per round: (1 - (1 - 2p)⁴)/2."""
    eps, rounds = 0.05, 6
    circuit = parse_qasm(REPETITION.format(last=rounds - 1), source="rep.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": eps}}}))
    result = analyze_measured(noisy, circuit, metric="detectors", engine="clifford")
    exact = analyze_measured(noisy, circuit, metric="detectors", engine="exact")
    s = math.sin(eps) ** 2
    p = math.sin(eps / 2) ** 2
    projected, twirled = 2 * s * (1 - s), (1 - (1 - 2 * p) ** 4) / 2
    for d, e in zip(result.detectors, exact.detectors):
        if d.round < rounds:
            assert d.probability == pytest.approx(projected, rel=1e-9)
            assert e.probability == pytest.approx(projected, rel=1e-3)
        else:  # the final data agree with the last check round
            assert d.probability < 1e-12 and e.probability < 1e-6
    assert projected < 0.1 * 2 * math.sin(rounds * eps) ** 2
    dets = tuple(d.measurements for d in infer_checks(noisy).detectors)
    assert frames(noisy, dets).detector_probability[0] == pytest.approx(twirled, rel=1e-9)
    # the three numbers: naive product, twirled, coherent
    assert result.twirled_infidelity == pytest.approx(frames(noisy, dets).any_fires, rel=1e-12)
    assert result.actual_infidelity > 1.5 * result.twirled_infidelity
    assert result.naive_infidelity == pytest.approx(1 - math.cos(eps / 2) ** (2 * 2 * 3 * rounds), rel=1e-9)
    assert exact.first_order == pytest.approx(result.actual_infidelity, rel=1e-12)


def test_cx_overrotation_with_control_in_zero_cancels():
    """The cx over-rotation is a rotation about the gate's own generator, proportional to
    |1⟩⟨1| ⊗ (I - X): with the control (a data qubit of the repetition code, always |0⟩ here) in
    |0⟩ it does nothing, so no detector can fire. Its Pauli terms (IX, ZX, ...) flip the same
    check and cancel in amplitude because Z on the control has the fixed value +1; twirled, they
    would fire the checks."""
    circuit = parse_qasm(REPETITION.format(last=2), source="rep.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"cx": {"overrotation": 0.04}}}))
    dets = tuple(d.measurements for d in infer_checks(noisy).detectors)
    assert max(frames(noisy, dets, coherent=True).detector_probability) < 1e-15
    assert max(analyze_measured(noisy, circuit, metric="detectors", engine="exact").detectors,
               key=lambda d: d.probability).probability < 1e-12
    assert min(frames(noisy, dets).detector_probability[:4]) > 1e-4


UNSEEN = """OPENQASM 3;
include "stdgates.inc";
qubit[2] q;
bit[{n}] a;
bit[2] f;
for int r in [0:{last}] {{
  x q[0]; x q[0];
  h q[1]; h q[1];
  a[r] = measure q[1];
}}
f[0] = measure q[0];
f[1] = measure q[0];
"""


def test_error_no_check_sees_builds_up_across_rounds():
    """q0 gets an over-rotated x pair per round and is measured only after N rounds (then once more,
    so that its first outcome is a detector); q1 is checked every round. No check sees q0's
    rotation, so it builds up: first principles, after N rounds q0 is R_x(2Nε)|0⟩ up to sign and
    its detector fires with sin²(Nε); twirled, 2N independent flips of p = sin²(ε/2) give
    (1 - (1 - 2p)^{2N})/2."""
    eps, n = 0.03, 12
    circuit = parse_qasm(UNSEEN.format(n=n, last=n - 1), source="unseen.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": eps}}}))
    checks = infer_checks(noisy)
    dets = tuple(d.measurements for d in checks.detectors)
    k = dets.index((n,))
    coherent = frames(noisy, dets, coherent=True).detector_probability
    assert coherent[k] == pytest.approx(math.sin(n * eps) ** 2, rel=1e-9)
    exact = analyze_measured(noisy, circuit, metric="detectors", engine="exact")
    assert exact.detectors[k].probability == pytest.approx(math.sin(n * eps) ** 2, rel=1e-9)
    p = math.sin(eps / 2) ** 2
    assert frames(noisy, dets).detector_probability[k] == pytest.approx((1 - (1 - 2 * p) ** (2 * n)) / 2, rel=1e-9)
    # the per-round checks on q1 see nothing
    assert max(coherent[i] for i in range(len(dets)) if i != k) < 1e-12


def test_classes_carry_family_parts_that_add_up():
    """Two families on the same x class interfere: their parts add up to the class probability."""
    circuit = parse_qasm(UNSEEN.format(n=3, last=2), source="unseen.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.02}, "h": {"overrotation": 0.01}}}))
    dets = tuple(d.measurements for d in infer_checks(noisy).detectors)
    for c in coherent_classes(noisy, dets):
        assert sum(c.family_parts.values()) == pytest.approx(c.probability, rel=1e-12)


def test_cli_shows_naive_twirled_and_coherent(tmp_path):
    path = tmp_path / "rep.qasm"
    path.write_text(REPETITION.format(last=3))
    model = tmp_path / "m.toml"
    model.write_text("[gates.x]\noverrotation = 0.05\n[qubits]\nreadout_error = 0.001\n")
    out = tmp_path / "o.json"
    res = CliRunner().invoke(app, ["analyze", str(path), "-e", str(model), "--metric", "detectors",
                                   "--engine", "clifford", "--compare-twirled", "--json", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["engine"] == "clifford"
    actual, twirled, naive = data["actual"]["infidelity"], data["twirled"]["infidelity"], data["naive"]["infidelity"]
    assert actual > 1.5 * twirled and naive > 0
    assert "first order in the amplitudes" in res.output


def test_unchecked_build_up_over_a_long_block_is_not_folded_away():
    """Above the folding threshold the frame path analyses 5 and 6 iterations; an error no check sees
    grows with every iteration, so the detectors after the block would keep its 5-iteration value.
    The fold notices (the detectors after the block differ between 5 and 6 iterations) and unrolls:
    the detector still follows sin²(Nε) (first principles, as above)."""
    from budget.analysis.folding import FOLD_AT

    eps, n = 0.01, FOLD_AT + 6
    circuit = parse_qasm(UNSEEN.format(n=n, last=n - 1), source="unseen.qasm")
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": eps}}}))
    result = analyze_measured(noisy, circuit, metric="detectors", engine="clifford")
    (after,) = [d for d in result.detectors if d.measurements == (n,)]
    assert after.probability == pytest.approx(math.sin(n * eps) ** 2, rel=1e-9)


RELAX = """OPENQASM 3;
include "stdgates.inc";
qubit[2] q;
bit[3] c;
{prep}
c[0] = measure q[1];
z q[1];
c[1] = measure q[0];
c[2] = measure q[0];
"""


@pytest.mark.parametrize("prep, flips", [("x q[0];", 1.0), ("", 0.0), ("h q[0];", None)])
def test_relaxation_jumps_follow_the_state(prep, flips):
    """q0 idles for the 400 ns of q1's measurement (the z after it keeps q0's measurement apart)
    with T1 = 40 µs, T2 = 2 T1 (no pure dephasing):
    amplitude damping with γ = 1 - exp(-t/T1) takes |1> to |0> with probability γ and leaves |0>
    alone (first principles of the channel, Nielsen & Chuang §8.3.5), so the detector on q0's first
    outcome fires with γ after x and never without; after h the outcome is random (no detector).
    Its Pauli twirl would flip either state with γ/2 (Tomita & Svore, PRA 90, 062320 (2014))."""
    t1 = 40.0
    model = {"qubits": {"t1_us": t1, "t2_us": 2 * t1}, "gates": {"measure": {"duration_ns": 400.0}, "x": {}}}
    noisy = attach(parse_qasm(RELAX.format(prep=prep), source="relax.qasm"), ErrorModel.from_dict(model))
    checks = infer_checks(noisy)
    dets = tuple(d.measurements for d in checks.detectors)
    gamma = 1 - math.exp(-0.4 / t1)
    if flips is None:
        assert (1,) not in dets
        return
    k = dets.index((1,))
    assert frames(noisy, dets, coherent=True).detector_probability[k] == pytest.approx(flips * gamma, abs=1e-15)
    assert frames(noisy, dets).detector_probability[k] == pytest.approx(gamma / 2, rel=1e-9)
    exact = analyze_measured(noisy, parse_qasm(RELAX.format(prep=prep)), metric="detectors", engine="exact")
    assert exact.detectors[k].probability == pytest.approx(flips * gamma, abs=1e-12)
