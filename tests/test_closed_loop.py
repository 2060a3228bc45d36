"""Tolerances in closed loop, checked against cirq's density-matrix simulation.

Every reference value here comes from cirq (tests/reference.py: the circuit rebuilt with explicit
channels and run by cirq.DensityMatrixSimulator), with the knobs set *through the error model*
(per-site tables of the model, as a lab would write them), never through the code under test
(budget/errors/retune.py, budget/analysis/closed_loop.py).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from budget.analysis.decide import checked_tolerances, decide
from budget.analysis.sensitivity import quadratic_form
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from tests.reference import cirq_infidelity


def _model_at(base: dict, site_values: dict[tuple[str, str], float]) -> dict:
    """``base`` (TOML layout) with per-site tables setting each (site, knob) to a value."""
    gates = {g: dict(v) for g, v in base["gates"].items()}
    for (site, knob), v in site_values.items():
        gate, qubits = site.rsplit(" ", 1)
        table = gates[gate].setdefault(qubits, {})
        if knob.startswith("z_phase["):
            z = table.setdefault("z_phase", list(base["gates"][gate].get("z_phase", [0.0, 0.0])))
            z[int(knob[8])] = v
        elif knob.startswith("pauli:"):
            table.setdefault("pauli", dict(base["gates"][gate].get("pauli", {})))[knob[6:]] = v
        else:
            table[knob] = v
    return {**base, "gates": gates}


def _cirq_at_tolerances(circuit: StructuredCircuit, base: dict, report, metric: str) -> float:
    """cirq's infidelity with every site at ± its tolerance: the mean over every sign pattern
    (random) or the reported worst pattern (worst)."""
    sites = [((s.site, s.knob), s.tolerance_rad) for r in report.rows for s in r.sites if math.isfinite(s.tolerance_rad)]
    if report.assume == "worst":
        signs = report.closed_loop.worst_signs
        patterns = [[signs[f"{k[0]}.{k[1]}"] for k, _ in sites]]
    else:
        patterns = list(itertools.product((1, -1), repeat=len(sites)))
    values = [
        cirq_infidelity(attach(circuit, ErrorModel.from_dict(_model_at(base, {k: s * t for (k, t), s in zip(sites, p)}))), metric)
        for p in patterns
    ]
    return max(values) if report.assume == "worst" else float(np.mean(values))


def _report(circuit, base, target, *, metric, assume, allocation="equal"):
    model = ErrorModel.from_dict(base)
    noisy = attach(circuit, model)
    qf = quadratic_form(noisy, metric)
    return checked_tolerances(circuit, model, noisy, qf, target, metric=metric, cycles=1, assume=assume,
                              allocation=allocation)


def _hxh() -> StructuredCircuit:
    return StructuredCircuit(("q[0]",), tuple(Layer((Operation(g, (0,)),)) for g in ("h", "x", "h")))


def test_reference_value_of_the_echoed_hadamard():
    """The issue's exact value: h; x; h with h over-rotated by 1 rad and r = 0.001, state metric,
    0.0546 (the issue's exact engine, an independent superoperator code and a cirq unitary agreed);
    here from cirq alone."""
    base = {"gates": {"h": {"overrotation": 1.0, "avg_infidelity": 0.001}}}
    assert cirq_infidelity(attach(_hxh(), ErrorModel.from_dict(base)), "state") == pytest.approx(0.05462, abs=5e-5)


@pytest.mark.parametrize("assume", ["worst", "random"])
def test_knob_without_first_order_effect_gets_a_second_order_tolerance(assume):
    """Issue 10, item 3: the first-order sensitivity of h's over-rotation in h; x; h is rounding
    noise (4.9e-32); the tolerance must come from the second-order effect, below π, and cirq with
    the knob at ± that tolerance must give the target within [0.9, 1.05]."""
    base = {"gates": {"h": {"overrotation": 0.01, "avg_infidelity": 0.001}}}
    report = _report(_hxh(), base, 0.011, metric="state", assume=assume)
    row = report.rows[0]
    assert row.order == "second" and not row.capped and 0.1 < row.tolerance_rad < math.pi
    assert row.status == "ok" and math.isinf(row.first_order_rad)
    assert report.closed_loop.engine == "exact" and report.closed_loop.converged
    assert 0.9 * 0.011 <= _cirq_at_tolerances(_hxh(), base, report, "state") <= 1.05 * 0.011


def test_a_knob_with_no_effect_at_any_order_is_said_so():
    """A z_phase right before a measurement in Z does not change the state metric at any order
    (cirq: |0> stays |0> under Rz); it must not get an angle, astronomic or capped."""
    circuit = StructuredCircuit(("q[0]",), (Layer((Operation("x", (0,)),)),))
    base = {"gates": {"x": {"z_phase": 0.01, "avg_infidelity": 0.001}}}
    assert cirq_infidelity(attach(circuit, ErrorModel.from_dict(_model_at(base, {("x q[0]", "z_phase"): 3.0}))), "state") \
        == pytest.approx(cirq_infidelity(attach(circuit, ErrorModel.from_dict(base)), "state"), abs=1e-9)
    row = _report(circuit, base, 0.01, metric="state", assume="worst").rows[0]
    assert row.order == "none" and math.isinf(row.tolerance_rad) and row.status == "no effect found"


def test_two_qubit_case_of_the_issue(tmp_path):
    """Issue 10, item 4: rzz(-1.339); cz; cz with Pauli knobs on cz, 10 cycles, state metric,
    random signs, target 0.0748. The leading-order tolerances overshoot; after the closed loop the
    cirq mean over every sign pattern lies within [0.9, 1.05] × target. (The issue's own Pauli
    values are not known; these are invented.)"""
    qasm = tmp_path / "c.qasm"
    qasm.write_text("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nrzz(-1.339) q[0],q[1];\ncz q[0],q[1];\ncz q[0],q[1];\n")
    base = {"gates": {"cz": {"pauli": {"XI": 0.01, "IY": -0.01, "ZZ": 0.02}, "avg_infidelity": 1e-3}}}
    toml = tmp_path / "m.toml"
    toml.write_text('[gates.cz]\navg_infidelity = 1e-3\npauli = {XI = 0.01, IY = -0.01, ZZ = 0.02}\n')
    d = decide(str(qasm), str(toml), target=0.0748, cycles=10, metric="state", assume="random")
    loop = d.tolerances.closed_loop
    assert loop.converged and 0.95 * 0.0748 <= loop.achieved <= 0.0748
    assert abs(loop.before_refinement / 0.0748 - 1) > 0.05  # the leading order alone was off
    from budget.analysis.run import read_circuit

    circuit = read_circuit(str(qasm)).with_cycles(10)
    assert 0.9 * 0.0748 <= _cirq_at_tolerances(circuit, base, d.tolerances, "state") <= 1.05 * 0.0748


_ONE = ("h", "sx", "x")


def _random_case(rng: np.random.Generator):
    """A random 1- or 2-qubit block repeated 1-6 times, with random knobs on at most 3 sites."""
    n = int(rng.integers(1, 3))
    names = tuple(f"q[{i}]" for i in range(n))
    layers = []
    for _ in range(int(rng.integers(2, 5))):
        if n == 2 and rng.random() < 0.35:
            layers.append(Layer((Operation("cz", (0, 1)),)))
        else:
            q = int(rng.integers(n))
            layers.append(Layer((Operation(str(rng.choice(_ONE)), (q,)),)))
    circuit = StructuredCircuit(names, (Repeat(tuple(layers), int(rng.integers(1, 7))),))
    gates: dict[str, dict] = {g: {"avg_infidelity": float(rng.uniform(0, 5e-4))} for g in _ONE}
    gates["cz"] = {"avg_infidelity": float(rng.uniform(0, 2e-3))}
    used = {op.gate for layer in layers for op in layer.operations}
    knobbed = [g for g in sorted(used) if rng.random() < 0.8] or [sorted(used)[0]]
    for g in knobbed:
        if g == "cz":
            gates[g]["cphase"] = float(rng.normal(0, 0.03))
        else:
            gates[g]["overrotation"] = float(rng.normal(0, 0.03))
    model = {"qubits": {"t1_us": 100.0, "t2_us": 80.0}, "gates": {g: {**v, "duration_ns": 30.0} for g, v in gates.items()}}
    return circuit, model


def test_sixty_random_cases_meet_the_target_in_cirq():
    """Issue 10's check: on 60 seeded random cases (worst and random signs, both metrics, both
    allocations), cirq's infidelity with every knob at its reported tolerance lies within
    [0.9, 1.05] × target (random: mean over every sign pattern; worst: the reported worst pattern)."""
    rng = np.random.default_rng(2026)
    checked = capped = 0
    ratios = []
    while checked < 60:
        circuit, base = _random_case(rng)
        metric = str(rng.choice(["process", "state"]))
        assume = str(rng.choice(["worst", "random"]))
        allocation = str(rng.choice(["equal", "common-factor"]))
        model = ErrorModel.from_dict(base)
        noisy = attach(circuit, model)
        bare = {**base, "gates": {g: {k: v for k, v in t.items() if k not in ("overrotation", "cphase")}
                                  for g, t in base["gates"].items()}}
        floor = cirq_infidelity(attach(circuit, ErrorModel.from_dict(bare)), metric)
        target = float(floor + rng.uniform(0.003, 0.05))
        report = checked_tolerances(circuit, model, noisy, quadratic_form(noisy, metric), target, metric=metric, cycles=1,
                                    assume=assume, allocation=allocation)
        sites = [s for r in report.rows for s in r.sites if math.isfinite(s.tolerance_rad)]
        if not report.feasible or not sites or len(sites) > 3:
            continue
        ratio = _cirq_at_tolerances(circuit, base, report, metric) / target
        ratios.append(ratio)
        if all(r.capped for r in report.rows if math.isfinite(r.tolerance_rad)) and not report.closed_loop.converged:
            capped += 1  # even π cannot use the budget: the knob barely matters; it must still meet the target
            assert ratio <= 1.05, (checked, report.closed_loop)
        else:
            assert 0.9 <= ratio <= 1.05, (checked, metric, assume, allocation, report.closed_loop)
        checked += 1
    assert len(ratios) == 60 and capped <= 6


def test_echoed_knobs_get_a_joint_second_order_tolerance():
    """Issue 10, item 1 (its tolerance part): x, y, x, y repeated 300 times with over-rotation 0.02
    on x and y. Each knob alone cancels exactly (Y Rx(δ) Y = Rx(-δ)); together their commutator
    builds up as (N δ²)². The first-order form says "no effect"; the report must say both must
    tighten, and cirq with both at their tolerance (reported worst signs) gives the target."""
    layers = tuple(Layer((Operation(g, (0,)),)) for g in ("x", "y", "x", "y"))
    circuit = StructuredCircuit(("q[0]",), (Repeat(layers, 300),))
    base = {"gates": {"x": {"overrotation": 0.02}, "y": {"overrotation": 0.02}}}
    assert cirq_infidelity(attach(circuit, ErrorModel.from_dict(base)), "process") == pytest.approx(3.595e-3, rel=1e-3)
    report = _report(circuit, base, 0.002, metric="process", assume="worst")  # (issue: 3.595e-3 exact at N = 300)
    assert {r.status for r in report.rows} == {"tighten"} and {r.order for r in report.rows} == {"second"}
    assert all(math.isinf(r.first_order_rad) for r in report.rows)
    assert 0.9 * 0.002 <= _cirq_at_tolerances(circuit, base, report, "process") <= 1.05 * 0.002
    assert report.closed_loop.today == pytest.approx(3.595e-3, rel=1e-3) and report.common_factor > 1


def test_out_of_time_keeps_the_leading_order_and_says_so():
    """A time limit that no engine run can meet: the tolerances stay leading order, with a warning."""
    from budget.analysis.closed_loop import close_loop
    from budget.analysis.tolerances import tolerances

    base = {"gates": {"h": {"overrotation": 0.01, "avg_infidelity": 0.001}}}
    noisy = attach(_hxh(), ErrorModel.from_dict(base), family_by="pair")
    qf = quadratic_form(noisy, "state")
    report = close_loop(tolerances(qf, 0.011, metric="state"), noisy, qf, max_seconds=1e-9)
    assert report.closed_loop is None and any("closed loop stopped" in w for w in report.warnings)


def test_a_slow_engine_gives_way_to_the_next_that_fits():
    """auto's first choice is replaced when its own estimate says one run is too slow for the loop
    (engines that estimate their run time); the note names both engines."""
    from budget.analysis.loop_runner import quick_enough

    class SlowExact:
        name = "exact"

        def estimate_seconds(self, circuit, metric):
            return 100.0

    circuit = StructuredCircuit(("q[0]",), (Repeat((Layer((Operation("x", (0,)),)),), 5),))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.01}}}))
    notes: list[str] = []
    chosen = quick_enough(SlowExact(), noisy, "process", 1.0, notes)
    assert chosen.name in ("clifford", "generators") and "exact run would take about 1e+02 s" in notes[0]


def test_context_knobs_are_checked_in_closed_loop_too():
    """A spectator-ZZ knob (rad per µs, budget/errors/context_terms.py): cirq with the coupling
    written in the model at ± the reported tolerance (in kHz) gives the target."""
    import tomllib
    from pathlib import Path

    from budget.analysis.run import read_circuit

    root = Path(__file__).resolve().parent.parent / "circuits"
    d = decide(str(root / "pair_memory_zz.qasm"), str(root / "fen_pair_zz.toml"), target=0.05)
    row = next(r for r in d.tolerances.rows if r.knob == "zz_rad_per_us")
    assert row.family == "zz q[0],q[1]" and row.status == "ok" and d.tolerances.closed_loop.converged
    sign = d.tolerances.closed_loop.worst_signs["zz q[0],q[1].zz_rad_per_us"]
    model = tomllib.loads((root / "fen_pair_zz.toml").read_text())
    model["couplings"]["q[0],q[1]"]["zz_khz"] = sign * row.tolerance_rad * 1000 / (2 * math.pi)
    value = cirq_infidelity(attach(read_circuit(str(root / "pair_memory_zz.qasm")), ErrorModel.from_dict(model)), "process")
    assert 0.9 * 0.05 <= value <= 1.05 * 0.05


def test_a_first_order_engine_that_sees_no_effect_says_what_it_cannot_see():
    """When the loop runs on an engine other than exact (here forced: clifford), knobs whose first
    order cancels and that it finds no effect of are flagged, not passed as free."""
    from budget.analysis.closed_loop import close_loop
    from budget.analysis.tolerances import tolerances

    layers = tuple(Layer((Operation(g, (0,)),)) for g in ("x", "y", "x", "y"))
    circuit = StructuredCircuit(("q[0]",), (Repeat(layers, 300),))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.02}, "y": {"overrotation": 0.02}}}),
                   family_by="pair")
    qf = quadratic_form(noisy, "process", engine="clifford")
    report = close_loop(tolerances(qf, 0.002), noisy, qf, engine="clifford")
    if report.closed_loop.engine == "clifford" and all(r.order == "none" for r in report.rows):
        assert any("would be missed" in n for n in report.closed_loop.notes)
    else:  # a clifford engine that carries the second order finds the echo's build-up instead
        assert all(r.order == "second" for r in report.rows)
