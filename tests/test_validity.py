"""Numbers inside their meaning: a first-order value beyond its range is flagged, never shown as an
infidelity; ``auto`` switches to an engine valid there; depth curves stop and say where.

Outside references:
- depolarizing channels composed N times on one qubit: with average gate infidelity r the channel is
  ρ -> (1-p)ρ + p I/2 with p = 2r, and F_pro = 1 - (3/4)(1 - (1-p)^N) (Nielsen & Chuang, Quantum
  Computation and Quantum Information (2000), §8.3 and §9.3; F_avg = (d F_pro + 1)/(d + 1),
  Horodecki, Horodecki, Horodecki, Phys. Rev. A 60, 1888 (1999); both references recalled from
  memory, the formula re-derived in the comment of _depolarized);
- cirq's DensityMatrixSimulator through tests/reference.py;
- N over-rotated X gates: coherent infidelity sin²(Nδ/2) (design.md §6), so the generators value
  of the depth curve is sin²(Nδ/2) + N (3/2) r and leaves its range at the first N where that
  exceeds 1.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from typer.testing import CliRunner

from budget.analysis.depth import depth_curve
from budget.analysis.run import analyze, analyze_noisy
from budget.engines.escalation import run_in_range
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.cli import app
from budget.engines import get_engine
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.report.plots import depth_svg
from budget.report.terminal import make_console, render_budget
from budget.report.terminal_views import render_depth
from tests.reference import cirq_process_infidelity

R = 0.01  # average gate infidelity of x
N = 300


def _x_repeated(n: int, model: dict):
    c = StructuredCircuit(("q[0]",), (Repeat((Layer((Operation("x", (0,)),)),), n),))
    return c, attach(c, ErrorModel.from_dict(model))


def _depolarized(n: int, r: float) -> float:
    # one qubit: F_avg = 1 - r = (1 + λ)/2 for ρ -> λρ + (1-λ) I/2, so λ = 1 - 2r; N gates give λ^N
    # (the rotations commute with depolarizing and X^N is the ideal), and F_pro = (3 F_avg - 1)/2 =
    # (1 + 3λ^N)/4, so 1 - F_pro = (3/4)(1 - λ^N)
    return 0.75 * (1 - (1 - 2 * r) ** n)


def test_generators_beyond_range_gives_no_value_and_no_verdict():
    model = {"gates": {"x": {"avg_infidelity": R}}}
    c, noisy = _x_repeated(N, model)
    r = analyze_noisy(noisy, c, metric="process", engine="generators")
    assert r.beyond_range is not None and "4.5" in r.beyond_range  # first-order sum N (3/2) r = 4.5
    d = r.to_dict()
    assert d["actual"]["infidelity"] is None and d["actual"]["in_range"] is False
    assert d["verdict"]["kind"] == "beyond-range" and d["coherent_amplification"] is None
    console = make_console(width=300, color=False)
    with console.capture() as cap:
        console.print(render_budget(r))
    out = cap.get()
    assert "beyond range" in out and "no verdict" in out and "fair guide" not in out


def test_auto_switches_to_an_engine_in_range():
    model = {"gates": {"x": {"avg_infidelity": R}}}
    _, noisy = _x_repeated(N, model)
    clifford = get_engine("clifford")
    assert clifford.run(noisy, "process").beyond_range is not None
    used, notes = run_in_range(noisy, "process", clifford, "auto")
    assert used.engine == "exact" and used.beyond_range is None
    assert "auto used the exact engine" in notes[0]
    assert used.infidelity == pytest.approx(_depolarized(N, R), rel=1e-9)  # closed form, see docstring
    kept, none = run_in_range(noisy, "process", clifford, "clifford")  # a named engine is not replaced
    assert kept.engine == "clifford" and kept.beyond_range is not None and none == ()


def test_in_range_values_stay_close_to_exact_and_cirq():
    # a two-qubit cycle with coherent and incoherent errors, first-order sum below 1: in range, and
    # within the measured envelope of the exact value (< 35 % here; design.md §4 says the
    # exponentiated form stays accurate well beyond the quadratic formula)
    model = {"qubits": {"t1_us": 80.0, "t2_us": 60.0},
             "gates": {"h": {"duration_ns": 30.0, "overrotation": 0.05, "avg_infidelity": 1e-3},
                       "cz": {"duration_ns": 60.0, "cphase": 0.1, "avg_infidelity": 4e-3}}}
    body = (Layer((Operation("h", (0,)), Operation("h", (1,)))), Layer((Operation("cz", (0, 1)),)))
    for reps in (2, 6, 12, 40):  # 40: beyond range (coherent 0.88 + incoherent 0.40)
        c = StructuredCircuit(("q[0]", "q[1]"), (Repeat(body, reps),))
        noisy = attach(c, ErrorModel.from_dict(model))
        gen = get_engine("generators").run(noisy, "process")
        exact = get_engine("exact").run(noisy, "process").infidelity
        assert exact == pytest.approx(cirq_process_infidelity(noisy), abs=1e-9)
        if gen.beyond_range is None:
            assert gen.infidelity <= 1 and abs(gen.infidelity - exact) <= 0.35 * exact
        else:
            total = gen.details["coherent_exponentiated"] + gen.details["stochastic_first_order"]
            assert total > 1


def test_depth_curve_stops_where_the_range_ends_and_says_so(tmp_path):
    delta = 0.01
    model = {"gates": {"x": {"overrotation": delta, "avg_infidelity": 2e-3}}}
    block = attach(StructuredCircuit(("q[0]",), (Layer((Operation("x", (0,)),)),)), ErrorModel.from_dict(model))
    curve = depth_curve(block, max_cycles=2000, points=12, engine="generators", target=0.5)
    p = 1.5 * 2e-3  # process infidelity of the depolarizing part per gate
    end = next(n for n in range(1, 2001) if math.sin(n * delta / 2) ** 2 + n * p > 1)  # brute force
    assert curve.range_ends["structured"] == end
    for n, v in zip(curve.repetitions, curve.structured):
        if n < end:
            assert v == pytest.approx(math.sin(n * delta / 2) ** 2 + n * p, rel=1e-6)
        else:
            assert v is None  # no clipped 1, no kink: no value
    data = curve.to_dict()
    assert data["range_ends"]["actual"] == end and data["actual"][-1] is None
    json.dumps(data, allow_nan=False)
    assert f"range ends, N = {end:,}" in depth_svg(curve)
    console = make_console(width=200, color=False)
    with console.capture() as cap:
        console.print(render_depth(curve))
    assert f"first-order range ends at N = {end:,}" in cap.get() and "beyond range" in cap.get()


def test_headline_and_json_of_an_out_of_range_cli_run(tmp_path):
    qasm = tmp_path / "x.qasm"
    qasm.write_text('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\nfor int i in [0:299] { x q[0]; }\n')
    model = tmp_path / "m.toml"
    model.write_text(f"[gates.x]\navg_infidelity = {R}\n")
    out = tmp_path / "r.json"
    res = CliRunner().invoke(app, ["analyze", str(qasm), "-e", str(model), "--engine", "generators", "--json",
                                   str(out), "--width", "200"])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["actual"]["infidelity"] is None and data["actual"]["estimate"] <= 1
    assert "no verdict" in res.output
    res = CliRunner().invoke(app, ["analyze", str(qasm), "-e", str(model), "--json", str(out), "--width", "200"])
    data = json.loads(out.read_text())
    assert data["engine"] == "exact" and data["actual"]["in_range"]
    assert data["actual"]["infidelity"] == pytest.approx(_depolarized(N, R), rel=1e-9)
    # the exact engine splits its own value (budget/engines/exact/split.py): one family, the whole
    # total; no first-order engine (beyond its range here) is asked for the split any more
    assert data["families"][0]["share"] == pytest.approx(data["actual"]["infidelity"], rel=1e-12)
    assert not any(w.startswith("family shares") for w in data["warnings"])
    assert np.isfinite(data["naive"]["infidelity"])


def test_auto_depth_curve_switches_to_exact_where_the_closed_form_leaves_its_range():
    # two qubits: auto uses the exact engine at every point anyway for <= 3 qubits, so take a
    # 4-qubit cycle (closed form under auto) whose first-order sum passes 1 within the grid
    model = {"gates": {"x": {"overrotation": 0.01, "avg_infidelity": 2e-3}}}
    c = StructuredCircuit(tuple(f"q[{i}]" for i in range(4)), (Layer(tuple(Operation("x", (i,)) for i in range(4))),))
    block = attach(c, ErrorModel.from_dict(model))
    curve = depth_curve(block, max_cycles=300, points=8, target=0.9)
    assert curve.engine.startswith("generators") and "structured" in curve.switches
    end = curve.switches["structured"]
    assert "structured" not in curve.range_ends and all(v is not None for v in curve.structured)
    for n, v in zip(curve.repetitions, curve.structured):
        if n >= end:  # from the switch on, exact values: per qubit a depolarized rotation by Nδ,
            # F_pro = λ^N cos²(Nδ/2) + (1 - λ^N)/4 with λ = 1 - 2r, and the four qubits multiply
            lam = (1 - 2 * 2e-3) ** n
            f_q = lam * math.cos(n * 0.01 / 2) ** 2 + (1 - lam) / 4
            assert v == pytest.approx(1 - f_q**4, rel=1e-9)
    assert curve.to_dict()["engine_switches"]["actual"] == end
    assert f"exact engine from N = {end:,}" in depth_svg(curve)
    assert any("the exact engine from" in w or "exact engine at every N" in w for w in curve.notes())


def test_observable_changes_beyond_two_are_not_shown():
    # <Z> after 300 depolarized X gates (even count: ideal |0>): λ^N with λ = 1 - 2r, so the change
    # is λ^N - 1 (depolarizing shrinks the Bloch vector by λ per gate, Nielsen & Chuang (2000) §8.3)
    c = StructuredCircuit(("q[0]",), (Repeat((Layer((Operation("x", (0,)),)),), N),))
    model = {"gates": {"x": {"avg_infidelity": R}}}
    exact = analyze(c, model, engine="exact", metric="state", observables=("Z0",))
    assert exact.observables["Z0"] == pytest.approx((1 - 2 * R) ** N - 1, rel=1e-9)
    first = analyze(c, model, engine="generators", metric="state", observables=("Z0",))
    assert first.observables["Z0"] is None  # first order gives -6: no Pauli expectation value moves by more than 2
    assert any("observable Z0" in w and "beyond" in w for w in first.warnings)
    assert first.to_dict()["observables"] == [{"observable": "Z0", "error": None}]


def test_a_leading_order_above_one_is_not_printed_as_a_number():
    # 100 X gates over-rotated by 0.03 rad: exponentiated value sin²(1.5) (design.md §6), exact for
    # commuting errors and in range, while the quadratic formula gives (Nδ/2)² = 2.25
    c, noisy = _x_repeated(100, {"gates": {"x": {"overrotation": 0.03}}})
    r = analyze_noisy(noisy, c, metric="process", engine="generators")
    assert r.in_range and r.actual == pytest.approx(math.sin(1.5) ** 2, rel=1e-9)
    assert r.first_order == pytest.approx(2.25, rel=1e-9)
    console = make_console(width=200, color=False)
    with console.capture() as cap:
        console.print(render_budget(r))
    assert "above 1" in cap.get() and "2.25" not in cap.get()
