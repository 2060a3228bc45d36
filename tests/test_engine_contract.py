"""One contract for every engine of the registry (budget/engines/base.py), on the same seeded cases.

Where an engine fits a case it must: give an infidelity in [0, 1]; fill ``shares`` so that they
add up to it; give the same first order as the generators engine when both are first-order
engines (process metric, where relaxation enters through its Pauli twirl in both, Blume-Kohout et
al., PRX Quantum 3, 020335 (2022)); match cirq's DensityMatrixSimulator when it is exact
(tests/reference.py); answer every capability it lacks with Unsupported and a reason, and honour
every capability it declares; and emit only details keys that docs/json-schema.md documents.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from budget.engines.base import CAPABILITIES, Engine, QuadraticForm, Unsupported
from budget.engines.door import ENGINE_NAMES, get_engine
from budget.errors.noisy import NoisyCircuit, NoisyRepeat
from clifford_reference import random_clifford_circuit
from reference import cirq_infidelity, random_noisy_circuit, scaled_incoherent

ROOT = Path(__file__).resolve().parent.parent
DOCUMENTED = set(re.findall(r"`details\.([a-z_]+)", (ROOT / "docs" / "json-schema.md").read_text()))
FIRST_ORDER = {"generators", "clifford", "pauli"}


def _cases() -> dict[str, NoisyCircuit]:
    out = {}
    for seed in range(3):
        rng = np.random.default_rng(900 + seed)
        out[f"clifford-{seed}"] = random_clifford_circuit(rng, 2 + seed, layers=3, repeat=[None, 3, 5][seed],
                                                          scale=0.01)
        rng = np.random.default_rng(950 + seed)
        out[f"general-{seed}"] = scaled_incoherent(
            random_noisy_circuit(rng, num_qubits=2 + seed % 2, num_layers=3, coherent_scale=0.01,
                                 repeat_count=[None, 4, 7][seed]), 0.3)
    return out


CASES = _cases()


def _engine(name: str) -> Engine:
    # the pauli engine untruncated: its first order is then the exact first order (its docs)
    return get_engine(name).configure(truncate=0.0) if name == "pauli" else get_engine(name)


@pytest.mark.parametrize("name", ENGINE_NAMES)
def test_every_engine_declares_its_interface(name):
    engine = get_engine(name)
    assert isinstance(engine, Engine) and engine.name == name
    assert engine.capabilities <= set(CAPABILITIES)
    assert isinstance(engine.brief(), Engine) and engine.brief().name == name
    for capability in CAPABILITIES:
        assert engine.supports(capability) == (capability in engine.capabilities)


@pytest.mark.parametrize("name", ENGINE_NAMES)
@pytest.mark.parametrize("case", list(CASES))
def test_shared_invariants(name, case):
    c = CASES[case]
    engine = _engine(name)
    gen = get_engine("generators")
    ran = 0
    for metric in ("process", "state"):
        if engine.fits(c, metric) is not None:
            continue
        ran += 1
        r = engine.run(c, metric)
        assert r.engine == name and r.metric == metric
        assert 0.0 <= r.infidelity <= 1.0
        assert r.shares, "every engine fills shares"
        assert sum(r.shares.values()) == pytest.approx(r.infidelity, rel=1e-9, abs=1e-15)
        assert set(r.details.to_json()) <= DOCUMENTED, set(r.details.to_json()) - DOCUMENTED
        if name in FIRST_ORDER and name != "generators" and metric == "process" and gen.fits(c, metric) is None:
            assert r.first_order == pytest.approx(gen.run(c, metric).first_order, rel=1e-9, abs=1e-13)
        if name == "exact":  # reference values from cirq
            assert r.infidelity == pytest.approx(cirq_infidelity(c, metric), rel=1e-7, abs=1e-12)
    # every engine takes every case (small, a few qubits), but the clifford engine a non-Clifford one
    assert ran == 2 or (name == "clifford" and case.startswith("general")), (name, case)


@pytest.mark.parametrize("name", ENGINE_NAMES)
def test_capabilities_answer_or_decline_explicitly(name):
    engine = _engine(name)
    c = CASES["clifford-1"]
    assert engine.fits(c, "process") is None or name == "pauli"
    c = CASES["general-1"] if name == "pauli" else c
    calls = {
        "estimate_seconds": lambda: engine.estimate_seconds(c, "process"),
        "observables": lambda: engine.run(c, "state", observables=("Z0", "X0Z1")).observable_errors,
        "quadratic_form": lambda: engine.quadratic_form(c, "process"),
        "repeat_sweep": lambda: engine.repeat_sweep(c, "process").values((1, 3)),
        "detector_probabilities": lambda: engine.detector_probabilities(c),
    }
    assert set(calls) == set(CAPABILITIES)
    for capability, call in calls.items():
        if not engine.supports(capability):
            with pytest.raises(Unsupported) as err:
                call()
            assert err.value.engine == name and err.value.capability == capability and err.value.reason
            continue
        got = call()
        if capability == "estimate_seconds":
            assert 0.0 <= got < 60.0
        elif capability == "observables":
            assert set(got) == {"Z0", "X0Z1"} and all(abs(v) <= 2 for v in got.values())
        elif capability == "quadratic_form":
            assert isinstance(got, QuadraticForm) and got.floor >= 0
            delta = got.values_rad
            assert float(delta @ got.matrix @ delta) + got.floor == pytest.approx(
                engine.run(c, "process").first_order, rel=1e-6, abs=1e-13)
        elif capability == "repeat_sweep":
            for n, value, ok in zip(got.counts, got.infidelity, got.in_range):
                single = engine.run(NoisyCircuit(c.qubits, (NoisyRepeat(c.body, n),)), "process")
                assert ok and value == pytest.approx(single.infidelity, rel=1e-9)


def test_an_error_free_circuit_says_so_in_one_record():
    c = random_clifford_circuit(np.random.default_rng(1), 2, layers=2, scale=0.0, depolarizing=False, relaxation=False)
    for name in ENGINE_NAMES:
        engine = _engine(name)
        if engine.fits(c, "process") is not None:
            continue
        r = engine.run(c, "process")
        assert r.infidelity == 0.0
        if name != "pauli":  # the pauli engine runs its passes even at zero (its own tests)
            assert r.details.error_free is not None and r.details["error_free"] is True
