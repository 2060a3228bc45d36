"""Every example in circuits/ is analysed, and its numbers checked against cirq.

The example circuits and the fen-q8 model are invented demo data; the check is that the project's
answer for them equals cirq's DensityMatrixSimulator on the same noisy circuit (tests/reference.py,
independent of the project's engines), and that the usual invariants hold.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from budget import analyze, attach, load_circuit, load_model
from reference import cirq_infidelity

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((ROOT / "circuits").glob("*.qasm")) + sorted((ROOT / "circuits").glob("*.json"))
MODEL = ROOT / "circuits" / "fen_q8.toml"
OWN_MODEL = {"pair_memory_zz.qasm": "fen_pair_zz.toml", "pair_memory_echo.qasm": "fen_pair_zz.toml"}
"""Examples analysed with their own model file instead of fen_q8.toml."""


def model_for(path: Path) -> Path:
    return ROOT / "circuits" / OWN_MODEL[path.name] if path.name in OWN_MODEL else MODEL


def test_there_are_examples():
    assert len(EXAMPLES) >= 3


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
@pytest.mark.parametrize("metric", ["process", "state"])
def test_example_against_cirq(path, metric):
    result = analyze(path, model_for(path), metric=metric)
    assert 0.0 <= result.actual_infidelity <= 1.0
    assert 0.0 <= result.naive_infidelity <= 1.0
    # abs 1e-14: an input that is an eigenstate of every error (|00> under ZZ) leaves rounding only
    assert sum(f.share for f in result.families) == pytest.approx(result.actual_infidelity, rel=1e-9, abs=1e-14)
    noisy = attach(load_circuit(path), load_model(model_for(path)))
    if metric == "process" and noisy.num_qubits > 4:
        pytest.skip("cirq's Choi-state reference on 2n > 8 qubits is too slow for the suite")
    # cirq's density-matrix simulation of the same channels, unrolled (independent reference)
    expected = cirq_infidelity(noisy, metric)
    if result.engine == "exact":
        assert result.actual_infidelity == pytest.approx(expected, abs=1e-8)
    else:
        assert result.actual_infidelity == pytest.approx(expected, rel=0.05)


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_example_runs_folded_for_a_million_cycles(path):
    result = analyze(path, model_for(path), cycles=10**6, metric="state")
    assert result.cycles == 10**6
    assert 0.0 <= result.actual_infidelity <= 1.0


def test_spectator_zz_builds_up_and_the_echo_cancels_it():
    # Memory pair with ζ = 20 kHz, 800 ns of idle per cycle: φ = 2π·20 kHz·800 ns = 0.1005 rad per
    # cycle. Unechoed, the phases add: after N cycles the ZZ error is that of one phase Nφ,
    # (3/8)(1 - cos Nφ) (F_pro of diag(1,1,1,e^{iφ}) is |3 + e^{iφ}|²/16, hand derivation), far above
    # the N (3/8)(1 - cos φ) the fidelity product gives. The echo cancels it exactly.
    model = ROOT / "circuits" / "fen_pair_zz.toml"
    n, phi = 20, 2 * math.pi * 20e3 * 800e-9
    plain = analyze(ROOT / "circuits" / "pair_memory_zz.qasm", model, cycles=n, compare_twirled=True)
    share = {f.name: f.share for f in plain.families}
    assert plain.actual_infidelity > 2 * plain.naive_infidelity and plain.actual_infidelity > 2 * plain.twirled_infidelity
    assert share["zz q[0],q[1]"] > 10 * n * 3 / 8 * (1 - math.cos(phi)) / 2
    zz_only = analyze(ROOT / "circuits" / "pair_memory_zz.qasm", {"couplings": {"q[0],q[1]": {"zz_khz": 20.0}},
                      "gates": {"id": {"duration_ns": 200.0}}}, cycles=n)
    assert zz_only.actual_infidelity == pytest.approx(3 / 8 * (1 - math.cos(n * phi)), abs=1e-12)
    echo = analyze(ROOT / "circuits" / "pair_memory_echo.qasm", model, cycles=n, compare_twirled=True)
    # cancelled to first order; what is left is the ZZ's second-order interference with the
    # other errors (commutators count half in each family, docs/methods.md "Orders"): 2e-7 of the total
    assert abs({f.name: f.share for f in echo.families}["zz q[0],q[1]"]) < 1e-6 * echo.actual_infidelity
    assert echo.actual_infidelity < echo.naive_infidelity
