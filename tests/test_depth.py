"""Depth curves, crossover, deepest counts within a target, and which errors build up.

Outside references: the closed forms of design.md §6 for N repetitions of an over-rotated X
(coherent sin²(Nδ/2), twirled (1 - (1-2p)^N)/2 with p = sin²(δ/2), naive 1 - cos(δ/2)^(2N));
hand derivations for a cycle whose error anticommutes with it; cirq's unitaries for the
first-order build-up rate of random two-qubit cycles.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import cirq
import numpy as np
import pytest
from typer.testing import CliRunner

from budget.analysis.accumulation import cycle_errors
from budget.analysis.depth import depth_curve, repetition_grid
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.cli import app
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import InputError

DELTA = 0.01
ROOT = Path(__file__).resolve().parent.parent


def _x_cycle(model: dict) -> tuple:
    c = StructuredCircuit(("q[0]",), (Layer((Operation("x", (0,)),)),))
    return attach(c, ErrorModel.from_dict(model))


def _closed(n: int) -> tuple[float, float, float]:
    """(naive, structured, twirled) for N over-rotated X gates, design.md §6."""
    p = math.sin(DELTA / 2) ** 2
    return 1 - math.cos(DELTA / 2) ** (2 * n), math.sin(n * DELTA / 2) ** 2, (1 - (1 - 2 * p) ** n) / 2


def _first(pred, top: int) -> int | None:
    return next((n for n in range(1, top + 1) if pred(n)), None)


@pytest.mark.parametrize("engine", ["auto", "exact", "generators", "clifford"])
def test_over_rotated_x_matches_the_closed_forms(engine):
    block = _x_cycle({"gates": {"x": {"overrotation": DELTA}}})
    curve = depth_curve(block, max_cycles=1000, points=9, engine=engine, target=0.01)
    assert curve.repetitions[0] == 1 and curve.repetitions[-1] == 1000
    for n, a, b, c in zip(curve.repetitions, curve.naive, curve.structured, curve.twirled):
        naive, coherent, twirled = _closed(n)
        assert a == pytest.approx(naive, rel=1e-9)
        if engine != "clifford" or n * DELTA / 2 <= 0.5:  # clifford: leading order, small angles only
            assert b == pytest.approx(coherent, rel=1e-6, abs=1e-12)
        if curve.twirled_engine.startswith(("generators", "clifford")):
            # first-order engines add the twirled flip probabilities: N p, which differs from the
            # exact value by N(N-1)p² + ... (expansion of (1 - (1-2p)^N)/2)
            p = math.sin(DELTA / 2) ** 2
            assert c == pytest.approx(n * p, rel=1e-9)
            assert abs(c - twirled) <= (n * p) ** 2
        else:
            assert c == pytest.approx(twirled, rel=1e-6)
    i = curve.repetitions.index(100) if 100 in curve.repetitions else None
    if i is not None:  # design.md §6 check values at N = 100
        assert curve.structured[i] == pytest.approx(0.2298488471, abs=1e-9)
        assert curve.naive[i] == pytest.approx(0.0024969, abs=5e-8)
    # crossover and deepest counts, against a brute-force scan of the closed forms
    assert curve.crossover_repetitions == _first(lambda n: _closed(n)[1] > 2 * _closed(n)[0], 1000)
    assert curve.deepest["structured"] == _first(lambda n: _closed(n)[1] > 0.01, 1000) - 1  # 20
    assert curve.deepest["naive"] == _first(lambda n: _closed(n)[0] > 0.01, 1000) - 1  # 402
    assert curve.deepest["structured"] == 20 and curve.deepest["naive"] == 402


def test_state_metric_curve():
    # X^N Rx(Nδ)|0>: fidelity with X^N|0> is cos²(Nδ/2), the same closed form as the process metric
    block = _x_cycle({"gates": {"x": {"overrotation": DELTA}}})
    curve = depth_curve(block, max_cycles=300, points=6, metric="state")
    for n, b in zip(curve.repetitions, curve.structured):
        assert b == pytest.approx(math.sin(n * DELTA / 2) ** 2, rel=1e-6)


def test_error_that_anticommutes_with_the_cycle_is_echoed():
    # cycle X with a Z error h per cycle: X Z X = -Z, so the sum alternates h, 0, h, ... (hand
    # derivation): nothing grows, the bounded part is h / |sin(π/2)| = h.
    h = 0.004
    block = _x_cycle({"gates": {"x": {"pauli": {"Z": h}}}})
    (comp,) = cycle_errors(block).components()
    assert comp.name == "x.pauli:Z"
    assert comp.growing_rad == pytest.approx(0.0, abs=1e-15)
    assert comp.bounded_rad == pytest.approx(h, rel=1e-9)
    assert "echoed" in comp.behaviour
    # an over-rotation commutes with X: all of it grows, δ/2 per cycle
    (grow,) = cycle_errors(_x_cycle({"gates": {"x": {"overrotation": DELTA}}})).components()
    assert grow.growing_rad == pytest.approx(DELTA / 2, rel=1e-9) and grow.builds_up


def test_xy4_cancels_overrotation_but_not_axis_error():
    # XY4 (X Y X Y) compensates flip-angle errors to first order (recalled from memory; see
    # Souza, Álvarez, Suter, Phil. Trans. R. Soc. A 370, 4748 (2012)); an axis tilt of X survives.
    c = StructuredCircuit(("q",), tuple(Layer((Operation(g, (0,)),)) for g in "xyxy"))
    model = {"gates": {"x": {"overrotation": 0.01, "axis_error": 0.003}, "y": {"overrotation": 0.01}}}
    comps = {k.name: k for k in cycle_errors(attach(c, ErrorModel.from_dict(model))).components()}
    assert "cancels" in comps["x.overrotation"].behaviour and "cancels" in comps["y.overrotation"].behaviour
    assert comps["x.axis_error"].builds_up


def _cirq_power_infidelity(block, n: int) -> float:
    qs = cirq.LineQubit.range(block.num_qubits)
    ideal, noisy = [], []
    for layer in block.iter_layers():
        for nop in layer.operations:
            targets = [qs[q] for q in nop.qubits]
            ideal.append(cirq.MatrixGate(nop.op.unitary()).on(*targets))
            noisy += [ideal[-1], cirq.MatrixGate(nop.coherent).on(*targets)]
    u = np.linalg.matrix_power(cirq.unitary(cirq.Circuit(ideal)), n)
    v = np.linalg.matrix_power(cirq.unitary(cirq.Circuit(noisy)), n)
    d = u.shape[0]
    return 1 - abs(np.trace(u.conj().T @ v) / d) ** 2


@pytest.mark.parametrize("seed", range(3))
def test_growth_rate_predicts_deep_infidelity(seed):
    # One knob at a time on a random 2-qubit cycle: first order says the coherent infidelity after
    # N cycles lies in [(N g)², (N g)² + b²]; checked against cirq's unitaries at N = 400 (small
    # errors, so the first-order picture holds to a few per cent).
    rng = np.random.default_rng(seed)
    names = ["h", "sx", "x", "s"]
    layers = []
    for _ in range(3):
        a, b = rng.choice(names, 2)
        layers += [Layer((Operation(str(a), (0,)), Operation(str(b), (1,)))), Layer((Operation("cz", (0, 1)),))]
    c = StructuredCircuit(("a", "b"), tuple(layers))
    for knob, value in (("cphase", 2e-4), ("swap_angle", 1e-4)):
        block = attach(c, ErrorModel.from_dict({"gates": {"cz": {knob: value}}}))
        (comp,) = cycle_errors(block).components()
        n = 400
        exact = _cirq_power_infidelity(block, n)
        low, high = (n * comp.growing_rad) ** 2, (n * comp.growing_rad) ** 2 + comp.bounded_rad**2
        assert low * 0.97 - 1e-12 <= exact <= high * 1.03 + 1e-12


def test_grid_and_bad_requests():
    assert repetition_grid(10**18, 4) == (1, 10**6, 10**12, 10**18)
    grid = repetition_grid(5000, 30)
    assert list(grid) == sorted(set(grid)) and grid[0] == 1 and grid[-1] == 5000
    block = _x_cycle({"gates": {"x": {"overrotation": DELTA}}})
    for kwargs, word in (({"max_cycles": 0}, "max_cycles"), ({"max_cycles": 10, "points": 1}, "points"),
                         ({"max_cycles": 10, "target": 1.5}, "target")):
        with pytest.raises(InputError, match=word):
            depth_curve(block, **kwargs)


def test_depth_command_writes_json_and_svg(tmp_path):
    qasm = tmp_path / "x.qasm"
    qasm.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nx q[0];\n')
    model = tmp_path / "m.toml"
    model.write_text(f"[gates.x]\noverrotation = {DELTA}\n")
    out, svg = tmp_path / "d.json", tmp_path / "d.svg"
    res = CliRunner().invoke(app, ["depth", str(qasm), "-e", str(model), "--max-cycles", "100", "--points", "3",
                                   "--target", "0.01", "--json", str(out), "--plot", str(svg), "--width", "120"])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["repetitions"] == [1, 10, 100]
    assert data["actual"][-1] == pytest.approx(0.2298488471, abs=1e-9)
    assert set(data) >= {"naive", "actual", "twirled", "range_ends", "crossover_repetitions"}
    assert data["crossover_repetitions"] == _first(lambda n: _closed(n)[1] > 2 * _closed(n)[0], 100)
    assert svg.read_text().startswith("<svg") and "crossover" in svg.read_text()
    assert "crossover" in res.output
    # bad input: one clear line, exit code 2, no output files
    out2 = tmp_path / "e.json"
    res = CliRunner().invoke(app, ["depth", str(qasm), "-e", str(model), "--max-cycles", "10", "--target", "2",
                                   "--json", str(out2)])
    assert res.exit_code == 2 and "target" in res.output and not out2.exists()
