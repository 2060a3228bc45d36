"""Depth curves repeat the whole circuit: when a pulse bleeds across the seam between repetitions,
every repetition after the first carries it (the depth curve used to repeat the first repetition,
which has no predecessor, and missed N - 1 bleeds).

Closed form (derived here): one qubit, cycle `sx; x`, bleed x->sx with fraction f. The x pulse
(rotation π about X) spills f·π about X into the sx of the next repetition (docs/error-model.md,
pulse bleed); every pulse and every spill is a rotation about X, so they commute and N cycles carry
an X rotation error of (N - 1)·f·π in all, process infidelity sin²((N - 1) f π / 2)
(F_pro = cos²(δ/2) for a rotation error δ, design.md §6).
"""

from __future__ import annotations

import math

import pytest

from budget.analysis.depth import depth_curve
from budget.analysis.run import analyze
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel

F = 0.004
QASM = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nsx q[0];\nx q[0];\n'


def _closed(n: int) -> float:
    return math.sin((n - 1) * F * math.pi / 2) ** 2


@pytest.mark.parametrize("engine", ["auto", "exact", "generators"])
def test_depth_curve_carries_the_bleed_across_every_seam(engine):
    circuit = parse_qasm(QASM, source="seam.qasm")
    model = ErrorModel.from_dict({"bleed": {"x->sx": {"fraction": F}}})
    block = attach(circuit, model)
    assert block.later_body is not None
    curve = depth_curve(block, max_cycles=40, points=6, engine=engine)
    for n, v in zip(curve.repetitions, curve.structured):
        assert v == pytest.approx(_closed(n), rel=1e-6, abs=1e-15), n
        # the same number as analyze on the circuit repeated n times (attach peels the first repetition)
        whole = analyze(circuit, model, cycles=n, engine="exact").actual_infidelity
        assert v == pytest.approx(whole, rel=1e-6, abs=1e-15), n
