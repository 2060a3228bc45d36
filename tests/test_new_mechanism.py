"""A new error mechanism is a change inside errors/ only (DEVELOPERS.md, "An error mechanism").

The mechanism here is one no engine has seen: a drive on a qubit leaks a two-qubit Hamiltonian
term θ·XX onto the qubit and its neighbour. It is written as an error site of the layer
(:func:`budget.errors.context_terms.error_site`, support on both qubits, after the layer's gates);
nothing in engines/ changes. Every engine reads it through the layer's normal form and gives the
closed form, and the exact engine agrees with cirq's density-matrix simulator on seeded random
circuits (the site written as an explicit cirq gate after the layer's own channels).
"""

from __future__ import annotations

import dataclasses
import math

import cirq
import numpy as np
import pytest

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.engines import get_engine
from budget.errors.attach import attach
from budget.errors.context_terms import error_site
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyCircuit, map_items
from tests.reference import cirq_infidelity

_XX = np.kron([[0, 1], [1, 0]], [[0, 1], [1, 0]]).astype(complex)


def _leak(a: int, b: int, theta: float):
    """exp(-i θ XX) on (a, b), knob ``leak`` with unit generator {XX: 1}."""
    u = math.cos(theta) * np.eye(4) - 1j * math.sin(theta) * _XX
    return error_site((a, b), "leak", f"leak q[{a}],q[{b}]", u, {"XX": theta}, "leak", theta, {"XX": 1.0}, 25.0)


def _with_leaks(noisy: NoisyCircuit, theta: float) -> NoisyCircuit:
    """Every layer with a driven sx on a qubit q < n-1 gets the site leak(q, q+1)."""

    def layer(it):
        sites = tuple(_leak(n.qubits[0], n.qubits[0] + 1, theta) for n in it.operations
                      if n.op.gate == "sx" and n.qubits[0] + 1 < noisy.num_qubits)
        return dataclasses.replace(it, context=it.context + sites) if sites else it

    return dataclasses.replace(noisy, body=map_items(noisy.body, layer, memo={}))


def test_every_engine_reads_a_mechanism_it_has_never_seen():
    # One leak θ·XX after an sx on q[0], then a cz: a single Pauli term, so the process infidelity
    # is 1 - cos²θ = sin²θ exactly (F_pro of exp(-iθP) is cos²θ, hand derivation) and its first
    # order θ²; conjugating by the later cz does not change it.
    theta = 0.01
    c = StructuredCircuit(("q[0]", "q[1]"), (Layer((Operation("sx", (0,)),)), Layer((Operation("cz", (0, 1)),))), source="leak")
    noisy = _with_leaks(attach(c, ErrorModel.from_dict({})), theta)
    assert [len(layer.context) for layer in noisy.body] == [1, 0]
    assert get_engine("exact").run(noisy, "process").infidelity == pytest.approx(math.sin(theta) ** 2, rel=1e-10)
    for name in ("generators", "clifford", "pauli"):
        got = get_engine(name).run(noisy, "process")
        assert got.first_order == pytest.approx(theta**2, rel=1e-9), name
        assert got.shares["leak q[0],q[1]"] == pytest.approx(got.infidelity, rel=1e-9), name  # its own family
        assert sum(abs(v) for f, v in got.shares.items() if f != "leak q[0],q[1]") == 0.0, name


@pytest.mark.parametrize("seed", range(6))
def test_exact_engine_matches_cirq_with_a_new_mechanism(seed):
    rng = np.random.default_rng(700 + seed)
    n = 3

    def layer():
        ops = [Operation(str(rng.choice(["sx", "x", "h"])), (q,)) for q in range(n) if rng.random() < 0.7]
        return Layer(tuple(ops) or (Operation("sx", (0,)),))

    c = StructuredCircuit(tuple(f"q[{i}]" for i in range(n)),
                          (layer(), Repeat((layer(), Layer((Operation("cz", (0, 1)),))), 3), layer()), source="leak")
    model = ErrorModel.from_dict({"qubits": {"t1_us": 40.0, "t2_us": 30.0},
                                  "gates": {"sx": {"duration_ns": 25.0, "overrotation": 0.02},
                                            "x": {"duration_ns": 25.0, "avg_infidelity": 1e-3},
                                            "h": {"duration_ns": 25.0}, "cz": {"duration_ns": 60.0, "cphase": 0.03}}})
    noisy = _with_leaks(attach(c, model), float(rng.uniform(0.01, 0.1)))
    assert get_engine("exact").run(noisy, "process").infidelity == pytest.approx(cirq_infidelity(noisy, "process"), abs=1e-9)
    assert get_engine("exact").run(noisy, "state").infidelity == pytest.approx(cirq_infidelity(noisy, "state"), abs=1e-9)
