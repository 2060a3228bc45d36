"""Tolerances in closed loop and uncertainty sweeps on the detector metric (issue 13).

First principles used here (derived beside each test): in the repetition code of
tests/test_measured_frames.py with over-rotation t on each x of a pair, each data qubit flips with
s = sin²t per round, independently of the other rounds (the checks project the error); no detector
of a round fires when no data qubit or all three flip (the checks compare neighbours), so over R
rounds P(some detector fires) = 1 - ((1 - s)³ + s³)^R up to O(s³) interference terms between the
|000> and |111> branches (the exact engine keeps them; they are below 1e-9 here).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from budget.analysis.decide import decide
from budget.analysis.sweep import sweep
from budget.circuit.qasm import parse_qasm
from tests.test_measured_coherent import UNSEEN
from tests.test_measured_frames import REPETITION


def _p_any(t: float, rounds: int) -> float:
    s = math.sin(t) ** 2
    return 1 - ((1 - s) ** 3 + s**3) ** rounds


def test_tolerance_closed_loop_on_the_detector_metric():
    rounds, target = 4, 0.05
    circuit = parse_qasm(REPETITION.format(last=rounds - 1), source="rep.qasm")
    d = decide(circuit, {"gates": {"x": {"overrotation": 0.03}}}, target=target, metric="detectors")
    report = d.tolerances
    (row,) = report.rows
    loop = report.closed_loop
    assert loop is not None and loop.engine == "exact"
    # the loop's own acceptance, and the value at the tolerance from first principles
    assert 0.95 * target <= loop.achieved <= target
    assert loop.achieved == pytest.approx(_p_any(row.tolerance_rad, rounds), rel=1e-6)
    assert loop.today == pytest.approx(_p_any(0.03, rounds), rel=1e-6)


def test_tolerance_on_one_detector_is_checked_on_that_detector():
    """Detector 0 (the first round of check Z0Z2) fires when exactly one of data 0 and 2 flips:
    2 s (1 - s) with s = sin²t (first principles as above)."""
    circuit = parse_qasm(REPETITION.format(last=2), source="rep.qasm")
    target = 0.01
    d = decide(circuit, {"gates": {"x": {"overrotation": 0.03}}}, target=target, metric="detectors", detector=0)
    (row,) = d.tolerances.rows
    s = math.sin(row.tolerance_rad) ** 2
    assert d.tolerances.closed_loop.achieved == pytest.approx(2 * s * (1 - s), rel=1e-6)
    assert 0.95 * target <= 2 * s * (1 - s) <= target


def test_sweep_of_the_detector_metric():
    """q0 of the UNSEEN circuit is rotated by ε per x and checked only after N rounds: P(some
    detector fires) = sin²(Nε) (first principles, tests/test_measured_coherent.py). With ε uniform
    on [a, b] its mean is 1/2 - (sin 2Nb - sin 2Na) / (4N(b - a)); the sample mean of 64 seeded draws
    lies within 4 standard errors of it, and every sample equals sin²(Nε) at its drawn ε."""
    n, a, b = 6, 0.02, 0.06
    circuit = parse_qasm(UNSEEN.format(n=n, last=n - 1), source="unseen.qasm")
    model = {"gates": {"x": {"overrotation": {"low": a, "high": b}}}}
    res = sweep(circuit, model, samples=64, metric="detectors", sobol_base=0, workers=1)
    assert res.metric == "detectors" and res.to_dict()["metric"] == "detectors"
    expected = 0.5 - (math.sin(2 * n * b) - math.sin(2 * n * a)) / (4 * n * (b - a))
    assert abs(res.now.mean - expected) < 4 * res.now.std / math.sqrt(64)
    lo, hi = math.sin(n * a) ** 2, math.sin(n * b) ** 2
    assert lo - 1e-12 <= res.now.q05 <= res.now.q95 <= hi + 1e-12
    assert np.isfinite(res.now.std) and res.now.std > 0
