"""A new user's faults, round 4: each reproduction as a test.

Sources: stim's circuit generator (Gidney, Quantum 5, 497 (2021)) declares the detectors and the
logical observable of its memory experiments (the reference for the detector space); cirq's
density-matrix simulator for spot checks of numbers.
"""

from __future__ import annotations

import pytest
import stim

from budget.analysis.detectors import infer_checks
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel

from test_detectors_infer import noisy_from_stim, rank, stim_annotations


# --- XYZ color code: the final stabilizer parities were called logical observables ---------------------

@pytest.mark.parametrize("distance, rounds", [(3, 2), (3, 3), (3, 4), (5, 4), (3, 5)])
def test_color_code_detectors_are_stims(distance, rounds):
    """The check basis of stim's XYZ color code cycles from round to round, so the data's final
    parity closes with two earlier rounds of the check (not its last outcome) and a check equals
    the product of its two previous outcomes. The inference called the final parities logical
    observables (4 observables for distance 3, 4 rounds: P(some detector fires) left out the last
    round). Now the space is stim's, with one observable; up to 4 rounds the very same detectors."""
    gen = stim.Circuit.generated("color_code:memory_xyz", distance=distance, rounds=rounds)
    checks = infer_checks(noisy_from_stim(gen))
    dets, obs = stim_annotations(gen)
    ours = [set(d.measurements) for d in checks.detectors]
    assert len(checks.observables) == len(obs) == 1
    assert len(ours) == len(dets)
    assert rank(ours) == rank(ours + [set(d) for d in dets]) == len(dets)
    assert rank(ours + [set(o) for o in checks.observables]) == rank(ours + [set(d) for d in dets] + [set(obs[0])])
    if rounds <= 4:
        assert {frozenset(d.measurements) for d in checks.detectors} == set(dets)
