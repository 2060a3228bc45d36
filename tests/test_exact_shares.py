"""The exact engine's family shares (budget/engines/exact/split.py) against cirq, and the analyze
path running one engine for one number.

Reference: cirq's DensityMatrixSimulator (tests/reference.py) on the same circuit with only one
family's errors switched on, rebuilt here without the project's code; share_f = e_f · e / Σ e_g.
"""

from __future__ import annotations

import ast
import dataclasses
from pathlib import Path

import numpy as np
import pytest

from budget.analysis.run import analyze
from budget.engines.base import Engine
from budget.engines.door import ENGINE_NAMES, get_engine
from budget.engines.exact import ExactEngine
from budget.engines.exact import engine as engine_module
from budget.engines.exact import runner as runner_module
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyLayer
from reference import cirq_infidelity, mapped, random_noisy_circuit

ROOT = Path(__file__).resolve().parent.parent


def _alone(circuit: NoisyCircuit, family: str) -> NoisyCircuit:
    """Independent of the project's split: every other family's operations made ideal."""

    def operation(nop):
        if nop.family == family:
            return nop
        return dataclasses.replace(nop, coherent=np.eye(2 ** len(nop.qubits), dtype=complex), hamiltonian={},
                                   pauli_rates={}, depolarizing=0.0, relaxation=())

    return mapped(circuit, operation, lambda layer: layer.idle if family == IDLE else ())


def _families(circuit: NoisyCircuit) -> list[str]:
    fams = {nop.family for layer in circuit.distinct_layers() for nop in layer.operations}
    if any(not r.is_trivial for layer in circuit.distinct_layers() for r in layer.idle):
        fams.add(IDLE)
    return sorted(fams)


@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("seed", [3, 11])
def test_shares_are_isolated_infidelities_scaled_to_the_total_as_cirq_gives_them(metric, seed):
    rng = np.random.default_rng(seed)
    c = random_noisy_circuit(rng, num_qubits=2, num_layers=3, coherent_scale=0.05, repeat_count=3)
    r = ExactEngine().run(c, metric)
    total = cirq_infidelity(c, metric)
    isolated = {f: cirq_infidelity(_alone(c, f), metric) for f in _families(c)}
    assert r.infidelity == pytest.approx(total, rel=1e-8, abs=1e-13)
    s = sum(isolated.values())
    assert set(r.shares) == set(isolated)
    for f, e in isolated.items():
        assert r.shares[f] == pytest.approx(e * total / s, rel=1e-7, abs=1e-13), f
    assert sum(r.shares.values()) == pytest.approx(r.infidelity, rel=1e-12)
    assert r.details.split.isolated_sum == pytest.approx(s, rel=1e-7)
    assert r.details.split.family_runs == len(isolated)


def test_one_family_takes_the_whole_value_without_another_run():
    rng = np.random.default_rng(5)
    c = random_noisy_circuit(rng, num_qubits=1, num_layers=2, coherent_scale=0.03, incoherent=False)
    c = NoisyCircuit(c.qubits, tuple(NoisyLayer(tuple(dataclasses.replace(nop, family="g") for nop in layer.operations),
                                                layer.idle, layer.duration_ns) for layer in c.body))
    r = ExactEngine().run(c, "process")
    assert r.shares == {"g": r.infidelity} and r.details.split.family_runs == 0
    engine = ExactEngine()
    assert engine.estimate_seconds(c, "process") == engine.brief().estimate_seconds(c, "process")


def test_the_split_costs_one_noisy_run_per_family_in_batches_and_the_ideal_once_and_brief_skips_it(monkeypatch):
    """The stated cost (budget/engines/exact/engine.py): the joint noisy run, one noisy run per
    family (the runs of one register form walk the circuit together as one batch), and the ideal
    circuit propagated at most once per register form (unitary, Pauli)."""
    rng = np.random.default_rng(7)
    c = random_noisy_circuit(rng, num_qubits=2, num_layers=3)
    families = len(_families(c))
    assert families > 1
    noisy: list[int] = []  # batch size of each noisy walk
    ideal: list[int] = []  # site dimension of each ideal walk
    real_noisy, real_ideal = engine_module.propagate, runner_module.propagate

    def counted_noisy(runner, circuit, operator):
        noisy.append(runner.batch)
        return real_noisy(runner, circuit, operator)

    def counted_ideal(runner, circuit, operator):
        ideal.append(runner.s)
        return real_ideal(runner, circuit, operator)

    monkeypatch.setattr(engine_module, "propagate", counted_noisy)
    monkeypatch.setattr(runner_module, "propagate", counted_ideal)
    for metric in ("state", "process"):
        noisy.clear(), ideal.clear()
        full = ExactEngine().run(c, metric)
        assert noisy[0] == 1 and sum(noisy[1:]) == families and len(noisy) <= 3
        assert 1 <= len(ideal) == len(set(ideal)) <= 2
        noisy.clear(), ideal.clear()
        brief = ExactEngine().brief().run(c, metric)
        assert noisy == [1] and len(ideal) == 1 and brief.shares == {} and brief.infidelity == full.infidelity
        assert ExactEngine().estimate_seconds(c, metric) > ExactEngine().brief().estimate_seconds(c, metric)


@pytest.mark.parametrize("circuit, model, engine", [
    ("pair_memory_zz.qasm", "fen_pair_zz.toml", "exact"),
    ("parity_cycle.qasm", "fen_q8.toml", "exact"),
    ("hopping_trotter.qasm", "fen_q8.toml", "auto"),
])
def test_analyze_runs_one_engine_for_one_number(monkeypatch, circuit, model, engine):
    """Counts engine runs on the analyze path: one engine, called once from outside itself (the
    exact engine's own family-split runs happen inside its run)."""
    ran: list[str] = []
    depth = [0]
    for name in ENGINE_NAMES:
        cls = type(get_engine(name))
        real = cls.run

        def counted(self, circuit_, metric, *, _real=real, **kw):
            if depth[0] == 0:
                ran.append(self.name)
            depth[0] += 1
            try:
                return _real(self, circuit_, metric, **kw)
            finally:
                depth[0] -= 1

        monkeypatch.setattr(cls, "run", counted)
    r = analyze(ROOT / "circuits" / circuit, ROOT / "circuits" / model, engine=engine)
    assert len(ran) == 1 and ran[0] == r.engine, ran
    assert r.shares_known and sum(f.share for f in r.families) == pytest.approx(r.actual_infidelity, rel=1e-9)


def _imported_names(path: Path) -> set[str]:
    tree = ast.parse(path.read_text())
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            out |= {f"{node.module}.{a.name}" for a in node.names} | {node.module}
        elif isinstance(node, ast.Import):
            out |= {a.name for a in node.names}
    return out


def test_engines_are_chosen_only_behind_the_front_door():
    """No module of analysis/ or report/ imports the registry's lookup or order, or an engine
    class; the exact engine's plan words its reason without the registry."""
    banned = {"budget.engines.door.get_engine", "budget.engines.door.AUTO_ORDER", "budget.engines.get_engine",
              "budget.engines.exact.ExactEngine", "budget.engines.exact.engine.ExactEngine",
              "budget.engines.generators.GeneratorsEngine", "budget.engines.generators.engine.GeneratorsEngine",
              "budget.engines.clifford.CliffordEngine", "budget.engines.clifford.engine.CliffordEngine",
              "budget.engines.pauli.PauliEngine", "budget.engines.pauli.engine.PauliEngine"}
    for folder in ("analysis", "report"):
        for path in sorted((ROOT / "budget" / folder).glob("*.py")):
            assert not (_imported_names(path) & banned), path
    plan = _imported_names(ROOT / "budget" / "engines" / "exact" / "plan.py")
    assert not any(name.startswith("budget.engines.door") for name in plan)
    assert issubclass(ExactEngine, Engine)
