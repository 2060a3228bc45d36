"""Knobs set to trial values (budget/errors/retune.py) give the same circuit as an error model
written with those values: checked by cirq's density-matrix simulation of both
(tests/reference.py), per site and for proportional family rows."""

from __future__ import annotations

import numpy as np
import pytest

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.errors.retune import with_knob_values
from tests.reference import cirq_infidelity

CIRCUIT = StructuredCircuit(("q[0]", "q[1]"), (Repeat((
    Layer((Operation("sx", (0,)), Operation("rx", (1,), (0.7,)))),
    Layer((Operation("cz", (0, 1)),)),
    Layer((Operation("h", (1,)),)),
), 3),))


def _model(rng: np.random.Generator) -> dict:
    v = lambda: float(rng.normal(0, 0.05))  # noqa: E731
    return {"qubits": {"t1_us": 90.0, "t2_us": 70.0}, "gates": {
        "sx": {"duration_ns": 25.0, "overrotation": v(), "avg_infidelity": 2e-4},
        "rx": {"duration_ns": 25.0, "axis_error": v(), "overrotation": v()},
        "h": {"duration_ns": 25.0, "pauli": {"X": v(), "Y": v()}},
        "cz": {"duration_ns": 80.0, "cphase": v(), "swap_angle": v(), "z_phase": [v(), v()], "avg_infidelity": 1e-3},
    }}


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("metric", ["process", "state"])
def test_retuned_circuit_equals_the_model_with_those_values(seed, metric):
    rng = np.random.default_rng(seed)
    today, wanted = _model(rng), _model(rng)
    noisy = attach(CIRCUIT, ErrorModel.from_dict(today), family_by="pair")
    values = {}
    for gate, table in wanted["gates"].items():
        site = {"sx": "sx q[0]", "rx": "rx q[1]", "h": "h q[1]", "cz": "cz q[0],q[1]"}[gate]
        for knob, v in table.items():
            if knob == "z_phase":
                values.update({(site, f"z_phase[{i}]"): x for i, x in enumerate(v)})
            elif knob == "pauli":
                values.update({(site, f"pauli:{p}"): x for p, x in v.items()})
            elif knob not in ("duration_ns", "avg_infidelity"):
                values[(site, knob)] = v
    for gate in wanted["gates"]:  # incoherent parts stay as today
        for key in ("duration_ns", "avg_infidelity"):
            wanted["gates"][gate].pop(key, None)
            if key in today["gates"][gate]:
                wanted["gates"][gate][key] = today["gates"][gate][key]
    reference = cirq_infidelity(attach(CIRCUIT, ErrorModel.from_dict(wanted)), metric)
    assert cirq_infidelity(with_knob_values(noisy, values), metric) == pytest.approx(reference, rel=1e-9, abs=1e-13)


def test_a_family_row_scales_its_sites_in_proportion():
    """Gate grouping: two sites of one family at 0.02 and 0.01; the row value (the larger) set to
    0.06 puts them at 0.06 and 0.03."""
    circuit = StructuredCircuit(("q[0]", "q[1]"), (Layer((Operation("x", (0,)), Operation("x", (1,)))),))
    today = {"gates": {"x": {"overrotation": 0.02, "q[1]": {"overrotation": 0.01}}}}
    noisy = attach(circuit, ErrorModel.from_dict(today))
    wanted = {"gates": {"x": {"overrotation": 0.06, "q[1]": {"overrotation": 0.03}}}}
    reference = cirq_infidelity(attach(circuit, ErrorModel.from_dict(wanted)), "process")
    assert cirq_infidelity(with_knob_values(noisy, {("x", "overrotation"): 0.06}), "process") == pytest.approx(reference, rel=1e-9)
