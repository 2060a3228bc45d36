"""The main job end to end from Python: naive versus actual, shares, twirled comparison.

Check values from design.md §6 (common practice / closed forms, sources beside each).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from budget.analysis.run import analyze
from budget.analysis.twirl import twirled_circuit
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.pauli_algebra import twirl_probabilities

DELTA = 0.01
N = 100


def _x_repeated(n: int) -> StructuredCircuit:
    return StructuredCircuit(("q[0]",), (Repeat((Layer((Operation("x", (0,)),)),), n),))


MODEL = {"gates": {"x": {"overrotation": DELTA}}}


@pytest.mark.parametrize("engine", ["exact", "generators"])
def test_hundred_x_overrotations_build_up_coherently(engine):
    # N repetitions of a δ over-rotation: the error unitary Rx(δ) commutes with X, so the errors
    # add to Rx(Nδ): infidelity sin²(Nδ/2) = 0.2298488471 (design.md §6, closed form); the naive
    # product 1 - cos(δ/2)^(2N) = 0.0024969 (design.md §6).
    r = analyze(_x_repeated(N), MODEL, engine=engine, compare_twirled=True)
    assert r.actual_infidelity == pytest.approx(math.sin(N * DELTA / 2) ** 2, rel=1e-9, abs=1e-12)
    assert r.actual_infidelity == pytest.approx(0.2298488471, abs=1e-10)
    assert r.naive_infidelity == pytest.approx(1 - math.cos(DELTA / 2) ** (2 * N), rel=1e-12)
    assert r.naive_infidelity == pytest.approx(0.0024969, abs=5e-8)
    # twirled: a stochastic X flip with p = sin²(δ/2) per repetition; after N of them the net
    # flip probability is (1 - (1-2p)^N)/2 = 0.0024938019 (design.md §6; Wallman & Emerson,
    # Phys. Rev. A 94, 052325 (2016) for the twirl).
    p = math.sin(DELTA / 2) ** 2
    if engine == "exact":
        assert r.twirled_infidelity == pytest.approx((1 - (1 - 2 * p) ** N) / 2, rel=1e-6)
        assert r.twirled_infidelity == pytest.approx(0.0024938019, abs=1e-9)
    else:  # first order in the stochastic rates: N p, within O(N p) relative of the exact value
        assert r.twirled_infidelity == pytest.approx(N * p, rel=1e-9)
        assert r.twirled_infidelity == pytest.approx(0.0024938019, rel=5e-3)
    assert r.coherent_amplification == pytest.approx(r.actual_infidelity / r.naive_infidelity)
    assert r.coherent_amplification > 90


def test_json_has_the_documented_fields():
    d = analyze(_x_repeated(7), MODEL).to_dict()
    assert d["schema_version"] == 2
    assert d["circuit"] == {"qubits": 1, "operations": 7, "layers": 7, "cycles": 1}
    assert d["metric"] == "process"
    assert d["actual"]["in_range"] is True and d["verdict"]["kind"] in ("build-up", "fair", "cancellation")
    for key in ("engine", "naive", "actual", "coherent_amplification", "verdict", "families", "warnings"):
        assert key in d
    assert {"name", "operations", "share"} <= set(d["families"][0])


def test_cycles_fold_and_count_executed_work():
    r = analyze(_x_repeated(3), MODEL, cycles=10**9, engine="generators")
    assert r.operations == 3 * 10**9 and r.layers == 3 * 10**9
    assert 0.0 <= r.actual_infidelity <= 1.0
    # 3e9 over-rotations of 0.01 rad: the closed form sin²(3e9·δ/2) (the X's commute with Rx(δ))
    assert r.actual_infidelity == pytest.approx(math.sin(3e9 * DELTA / 2) ** 2, abs=1e-5)


def test_twirl_probabilities_of_a_cz_phase_offset():
    # diag(1,1,1,e^{iφ}): Pauli weights |Tr(P U)/4|²; the identity weight is
    # |(3 + e^{iφ})/4|² = (10 + 6 cos φ)/16 = F_pro (design.md §6), so the rest sums to 1 - F_pro.
    phi = 0.1
    u = np.diag([1, 1, 1, np.exp(1j * phi)])
    p = twirl_probabilities(u)
    assert sum(p.values()) == pytest.approx(1 - (10 + 6 * math.cos(phi)) / 16, rel=1e-12)
    assert set(p) == {"IZ", "ZI", "ZZ"}


def test_shares_add_up_on_a_two_qubit_example():
    c = StructuredCircuit(
        ("q[0]", "q[1]"),
        (
            Repeat(
                (
                    Layer((Operation("sx", (0,)), Operation("sx", (1,)))),
                    Layer((Operation("cz", (0, 1)),)),
                ),
                20,
            ),
        ),
    )
    model = {
        "qubits": {"t1_us": 60.0, "t2_us": 50.0},
        "gates": {
            "sx": {"overrotation": 0.004, "duration_ns": 25.0, "avg_infidelity": 2e-4},
            "cz": {"cphase": 0.02, "duration_ns": 50.0, "avg_infidelity": 2e-3},
        },
    }
    for metric in ("process", "state"):
        r = analyze(c, model, metric=metric)
        assert sum(f.share for f in r.families) == pytest.approx(r.actual_infidelity, rel=1e-9)
        assert {f.name for f in r.families} >= {"sx", "cz"}  # both qubits busy all the time: no idle slot
