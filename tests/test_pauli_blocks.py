"""Repeated non-Clifford blocks in the pauli engine: the early stop when a block's contribution has
converged (engines/pauli/_converge.py, docs/methods.md "Repeated blocks").

References outside the stop rule: the generators engine (dense periodic closed form, no cycle is
walked) for first-order values; the same engine on the block written out cycle by cycle (no repeat,
so nothing to stop) for the second-order value; cirq's unitary simulation for the order of accuracy;
and the untruncated value for the truncation bound's honesty.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from budget.circuit.qasm import parse_qasm
from budget.engines.exact.engine import ExactEngine
from budget.engines.generators.engine import GeneratorsEngine
from budget.engines.pauli import PauliEngine
from budget.engines.pauli._sweep import PATIENCE_CYCLES
from budget.problems import TooLargeError
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from pauli_cases import ising
from reference import random_noisy_circuit

EXACT = PauliEngine(truncate=0.0)
FIRST = PauliEngine(truncate=0.0, second_order=False)
HEAD = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[3] q;\nh q[0]; rx(0.4) q[1]; ry(0.3) q[2];\n'
DIAGONAL = "rz(0.3) q[0]; rzz(0.7) q[0], q[1]; p(0.2) q[1]; rzz(0.5) q[1], q[2];"
Z_ERRORS = {"rz": {"z_phase": [0.001]}, "rzz": {"overrotation": 0.0005}}


def _circuit(body: str, count: int | None, gates: dict, tail: str = "rx(0.2) q[0];"):
    loop = f"for int i in [1:{count}] {{ {body} }}\n" if count is not None else body + "\n"
    return attach(parse_qasm(HEAD + loop + tail + "\n"), ErrorModel.from_dict({"gates": gates}))


@pytest.mark.parametrize("count", [10, 1000, 10**6])
@pytest.mark.parametrize("metric", ["process", "state"])
def test_diagonal_block_converges_and_equals_the_closed_form(count, metric):
    """Z-type errors in a diagonal block commute with it: each cycle adds the same sum, the
    coherent part grows as N² (design.md §3); the generators engine's periodic closed form folds
    the block without walking it."""
    c = _circuit(DIAGONAL, count, Z_ERRORS)
    r = FIRST.run(c, metric)
    block = r.details["repeated_blocks"][0]
    assert block["mode"] == "converged" and block["count"] == count
    assert block["cycles_walked"] <= 6
    assert r.first_order == pytest.approx(GeneratorsEngine().run(c, metric).first_order, rel=1e-9)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_second_order_extrapolation_equals_the_written_out_block(metric):
    """Non-commuting errors (x over-rotation and z phase of rx, cphase of cx) in a block whose
    carried sum still changes by a constant step: H_2 is extrapolated by its second differences;
    the same engine on the 40 cycles written out (nothing to stop) gives the same value, and cirq
    (through the exact engine's dense unitaries) agrees within the first-order accuracy."""
    gates = {"rz": {"overrotation": 0.002}, "rx": {"overrotation": 0.003, "z_phase": [0.001]}, "cx": {"cphase": 0.002}}
    body = "rz(0.4) q[0]; rx(0.6) q[1]; cx q[0], q[1]; rx(-0.6) q[1]; rz(-0.4) q[0]; cx q[0], q[1];"
    folded, written = _circuit(body, 40, gates), _circuit(body * 40, None, gates)
    a, b = EXACT.run(folded, metric), EXACT.run(written, metric)
    assert a.details["repeated_blocks"][0]["mode"] == "converged"
    assert a.infidelity == pytest.approx(b.infidelity, rel=1e-9)
    assert a.first_order == pytest.approx(b.first_order, rel=1e-9)
    exact = ExactEngine().run(folded, metric).infidelity
    assert abs(a.infidelity - exact) <= exact**1.5


def test_trotter_block_does_not_converge():
    """rx after the ZZ part maps the errors elsewhere every cycle: nothing to extrapolate."""
    r = FIRST.run(ising(6, 12, incoherent=False), "process")
    assert {b["mode"] for b in r.details["repeated_blocks"]} == {"cycles"}


def test_state_metric_with_jump_operators_walks_every_cycle():
    """Jump operators carried as tags (registers too large for the state vector; forced here) are
    read at the state of their own time: such cycles are never extrapolated. On a small register
    the jumps are read off the state vector and the coherent sum may still converge; both equal
    the generators engine."""
    gates = {**Z_ERRORS, "p": {"avg_infidelity": 1e-4}}
    c = _circuit(DIAGONAL, 30, gates)
    want = GeneratorsEngine().run(c, "state").first_order
    tags = PauliEngine(truncate=0.0, second_order=False, vector_qubits=0).run(c, "state")
    assert tags.details["repeated_blocks"][0]["mode"] == "cycles"
    assert tags.first_order == pytest.approx(want, rel=1e-9)
    assert FIRST.run(c, "state").first_order == pytest.approx(want, rel=1e-9)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_converged_block_with_truncation_keeps_its_bound(metric):
    """A tiny error (p's z phase, below the threshold) is dropped in every cycle, the same rows each
    time: the block still converges, and the extrapolated value stays within the bound of the
    untruncated one; a threshold half as large moves it by no more than that bound."""
    gates = {**Z_ERRORS, "p": {"z_phase": [2e-6]}}
    c = _circuit(DIAGONAL, 5000, gates)
    exact = FIRST.run(c, metric)
    eps = 1e-5
    r = PauliEngine(truncate=eps, second_order=False).run(c, metric)
    assert r.details["repeated_blocks"][0]["mode"] == "converged"
    bound = r.details["truncation_bound"]
    assert bound > 0
    assert abs(r.first_order - exact.first_order) <= bound * (1 + 1e-9)
    half = PauliEngine(truncate=eps / 2, second_order=False).run(c, metric)
    assert abs(half.first_order - r.first_order) <= bound * (1 + 1e-9)


@pytest.mark.parametrize("seed", range(12))
def test_random_blocks_of_many_cycles_equal_the_generators_engine(seed):
    """Seeded random non-Clifford blocks (random gates and Pauli generators, incoherent errors on
    every other case) repeated 6-30 times: whichever way each block ends, the value is the
    generators engine's to 1e-9 (both metrics)."""
    rng = np.random.default_rng(7700 + seed)
    c = random_noisy_circuit(rng, num_qubits=2 + seed % 3, num_layers=3, coherent_scale=0.01,
                             incoherent=seed % 2 == 1, repeat_count=6 + 2 * seed)
    for metric in ("process", "state"):
        assert FIRST.run(c, metric).first_order == pytest.approx(GeneratorsEngine().run(c, metric).first_order, rel=1e-9)


def test_block_that_never_converges_is_refused_after_a_few_cycles() -> None:
    """A random non-Clifford block repeated 10^9 times neither converges nor reaches a fixed point:
    the sweep refuses after PATIENCE_CYCLES cycles, in well under a second, instead of walking 10^6 layers first (found by the suite: minutes before the refusal)."""
    circuit = random_noisy_circuit(np.random.default_rng(3), num_qubits=8, num_layers=2, repeat_count=10**9)
    t0 = time.process_time()
    with pytest.raises(TooLargeError, match=rf"neither converged .* after {PATIENCE_CYCLES} cycles, .* 1,000,000 layers"):
        PauliEngine().run(circuit, "state")
    assert time.process_time() - t0 < 30.0
