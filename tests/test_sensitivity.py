"""Sensitivity readout of the quadratic form: shares, interference verdicts, per-operation families.

Sources: cirq unitaries (X over-rotations around an ideal Y echo, process fidelity
|Tr(U_ideal† U)|²/d², Nielsen, Phys. Lett. A 303, 249 (2002)); the design rule that shares add up
to the total (design.md §5).
"""

from __future__ import annotations

import math

import cirq
import numpy as np
import pytest

from budget.analysis.families import per_operation
from budget.analysis.sensitivity import quadratic_form, sensitivity, sensitivity_json
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.engines.base import QuadraticForm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel


def _infidelity(u: np.ndarray, ideal: np.ndarray) -> float:
    return 1 - abs(np.trace(ideal.conj().T @ u)) ** 2 / len(u) ** 2


def test_shares_add_up_and_rank():
    rng = np.random.default_rng(5)
    m = rng.normal(size=(6, 6))
    qf = QuadraticForm(tuple(("f", f"k{i}") for i in range(6)), m @ m.T, rng.normal(0, 0.01, 6), 1e-3, {"f": 1e-3})
    s = sensitivity(qf, top_pairs=50)
    assert sum(k.share for k in s.knobs) == pytest.approx(s.coherent, rel=1e-12)
    assert s.total == pytest.approx(s.coherent + 1e-3)
    assert [abs(k.share) for k in s.knobs] == sorted((abs(k.share) for k in s.knobs), reverse=True)
    assert len(s.pairs) == 15 and all(-1 <= p.overlap <= 1 for p in s.pairs)
    assert sensitivity_json(s)["interference"][0]["overlap"] == s.pairs[0].overlap


@pytest.mark.parametrize("da, db, effect", [(0.02, 0.01, "cancel"), (0.02, -0.01, "add up")])
def test_interference_verdict_matches_cirq(da, db, effect):
    """Over-rotation "a", ideal Y, over-rotation "b": Y Rx(δ) Y† = Rx(-δ), so A = [[1, -1], [-1, 1]]/4.
    The verdict agrees with cirq: both errors together lose less (cancel) or more (add up) than
    the two alone."""
    qf = QuadraticForm((("a", "overrotation"), ("b", "overrotation")), np.array([[0.25, -0.25], [-0.25, 0.25]]),
                       np.array([da, db]), 0.0, {})
    (pair,) = sensitivity(qf).pairs
    assert pair.effect == effect and pair.overlap == pytest.approx(-1.0)
    y = cirq.unitary(cirq.Y)
    ideal = cirq.unitary(cirq.rx(math.pi)) @ y @ cirq.unitary(cirq.rx(math.pi))

    def e(a, b):
        return _infidelity(cirq.unitary(cirq.rx(math.pi + b)) @ y @ cirq.unitary(cirq.rx(math.pi + a)), ideal)

    together, apart = e(da, db), e(da, 0) + e(0, db)
    assert (together < apart) == (effect == "cancel")
    assert together - apart == pytest.approx(pair.cross_term, rel=0.01)


def test_per_operation_families():
    """One family per operation as written; an operation inside a repeat stays one family; the
    coherent total does not depend on the grouping (all operations of a family share one value)."""
    block = (Layer((Operation("h", (0,), line=4), Operation("sx", (1,), line=5))),
             Layer((Operation("cz", (0, 1), line=6),)), Layer((Operation("sx", (0,), line=7),)))
    circuit = StructuredCircuit(("q[0]", "q[1]"), (Repeat(block, 5),))
    model = ErrorModel.from_dict({"gates": {"h": {"overrotation": 0.004}, "sx": {"overrotation": -0.003},
                                            "cz": {"cphase": 0.01, "avg_infidelity": 1e-3}}})
    noisy = attach(circuit, model)
    split = per_operation(noisy)
    names = sorted({nop.family for layer in split.distinct_layers() for nop in layer.operations})
    assert names == ["cz q[0],q[1] @6", "h q[0] @4", "sx q[0] @7", "sx q[1] @5"]
    for metric in ("process", "state"):
        whole, parts = quadratic_form(noisy, metric), quadratic_form(split, metric)
        assert len(parts.labels) == 4 and len(whole.labels) == 3
        assert sensitivity(parts).coherent == pytest.approx(sensitivity(whole).coherent, rel=1e-9)
        assert parts.floor == pytest.approx(whole.floor, rel=1e-9)
