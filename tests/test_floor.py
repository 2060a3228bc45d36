"""When the incoherent floor exceeds the target (issue 9, item 14): the incoherent numbers the
report proposes must meet the target. Reference: cirq's density-matrix simulation
(tests/reference.py) of the circuit under the error model rewritten with the proposed numbers
(the factors are solved on the exact engine, which is itself checked against cirq in
tests/test_exact.py, so cirq must agree to rounding)."""

from __future__ import annotations

import pytest

from budget.analysis.decide import decide
from budget.analysis.run import read_circuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from tests.reference import cirq_infidelity

QASM = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0];\ncz q[0],q[1];\nsx q[1];\ncz q[0],q[1];\nh q[0];\n'


def _model(r_h: float, r_cz: float, t1: float, t2: float) -> dict:
    return {"qubits": {"t1_us": t1, "t2_us": t2},
            "gates": {"h": {"duration_ns": 30.0, "avg_infidelity": r_h, "overrotation": 0.01},
                      "sx": {"duration_ns": 30.0},
                      "cz": {"duration_ns": 200.0, "avg_infidelity": r_cz, "cphase": 0.02}}}


def _toml(m: dict) -> str:
    q, g = m["qubits"], m["gates"]
    return (f"[qubits]\nt1_us = {q['t1_us']}\nt2_us = {q['t2_us']}\n"
            f"[gates.h]\nduration_ns = 30.0\navg_infidelity = {g['h']['avg_infidelity']}\noverrotation = 0.01\n"
            "[gates.sx]\nduration_ns = 30.0\n"
            f"[gates.cz]\nduration_ns = 200.0\navg_infidelity = {g['cz']['avg_infidelity']}\ncphase = 0.02\n")


def _floor(circuit, m: dict, metric: str) -> float:
    bare = {"qubits": m["qubits"], "gates": {k: {x: y for x, y in v.items() if x not in ("overrotation", "cphase")}
                                             for k, v in m["gates"].items()}}
    return cirq_infidelity(attach(circuit, ErrorModel.from_dict(bare)), metric)


@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("fraction", [0.4, 0.75])
def test_the_proposed_incoherent_numbers_meet_the_target(tmp_path, metric, fraction):
    base = _model(2e-3, 1e-2, 40.0, 30.0)
    (tmp_path / "c.qasm").write_text(QASM)
    (tmp_path / "m.toml").write_text(_toml(base))
    circuit = read_circuit(str(tmp_path / "c.qasm"))
    target = fraction * _floor(circuit, base, metric)
    d = decide(str(tmp_path / "c.qasm"), str(tmp_path / "m.toml"), target=target, metric=metric)
    rem = d.tolerances.floor_remedy
    assert not d.tolerances.feasible and rem is not None
    assert rem.engine == "exact" and rem.floor == pytest.approx(_floor(circuit, base, metric), rel=1e-9)
    assert rem.depolarizing + rem.relaxation == pytest.approx(rem.floor, rel=0.1)  # first order: they add up
    g = rem.scale_all
    everything = _model(2e-3 * g, 1e-2 * g, 40.0 / g, 30.0 / g)
    assert _floor(circuit, everything, metric) == pytest.approx(target, rel=1e-4)
    families = {f.family: f for f in rem.families}
    assert families["cz"].needed_all == pytest.approx(1e-2 * g) and families["h"].needed_all == pytest.approx(2e-3 * g)
    if rem.gates_alone is not None:
        gates = _model(2e-3 * rem.gates_alone, 1e-2 * rem.gates_alone, 40.0, 30.0)
        assert _floor(circuit, gates, metric) == pytest.approx(target, rel=1e-4)
    if rem.coherence_alone is not None:
        times = _model(2e-3, 1e-2, 40.0 / rem.coherence_alone, 30.0 / rem.coherence_alone)
        assert _floor(circuit, times, metric) == pytest.approx(target, rel=1e-4)
    text = rem.message()
    assert "T1 40 →" in text and "cz 0.01 →" in text
    assert (rem.gates_alone is None) == (rem.relaxation >= target)  # relaxation alone too high: gates cannot
    assert (rem.coherence_alone is None) == (rem.depolarizing >= target)
    assert ("gate errors alone cannot" in text) == (rem.gates_alone is None)
    assert ("T1/T2 alone cannot" in text) == (rem.coherence_alone is None)
    if fraction == 0.75:  # either kind of improvement alone can do it here
        assert rem.gates_alone is not None and rem.coherence_alone is not None


def test_no_remedy_when_the_floor_meets_the_target(tmp_path):
    (tmp_path / "c.qasm").write_text(QASM)
    (tmp_path / "m.toml").write_text(_toml(_model(1e-4, 1e-3, 100.0, 80.0)))
    d = decide(str(tmp_path / "c.qasm"), str(tmp_path / "m.toml"), target=0.2)
    assert d.tolerances.feasible and d.tolerances.floor_remedy is None


def test_floor_above_target_reads_as_one_story(tmp_path):
    """With the floor above the target no coherent budget is left: the views say 'none' (never a
    negative budget) and the closing line does not say 'nothing to do' after 'floor too high'.
    Floor here: one cx with r = 0.05, process infidelity (d+1)/d · r = 5/4 · 0.05 = 0.0625
    (Nielsen, Phys. Lett. A 303, 249 (2002))."""
    from typer.testing import CliRunner

    from budget.cli import app

    c = tmp_path / "c.qasm"
    c.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0];\ncx q[0],q[1];\n')
    m = tmp_path / "m.toml"
    m.write_text("[gates.cx]\navg_infidelity = 0.05\n[gates.h]\noverrotation = 0.01\n")
    for command in ("tolerances", "cost"):
        out = CliRunner().invoke(app, [command, str(c), "-e", str(m), "--target", "0.01", "--width", "160"]).output
        assert "0.0625" in out
        assert "coherent budget      none" in out
        assert "-0.0525" not in out and "nothing to do" not in out
        assert "until the incoherent floor is lowered" in out
