"""A new user's faults, round 3: each reproduction as a test.

Sources: cirq unitaries for the process infidelity of an over-rotation (|Tr(U_ideal† U)|²/d²,
Nielsen, Phys. Lett. A 303, 249 (2002)); the Cauchy-Schwarz inequality for the interference
threshold; "tables a user can read at 80 columns" is common practice, no source.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import cirq
import numpy as np
import pytest
import stim
from rich.console import Console
from typer.testing import CliRunner

import budget.analysis._sweep_exec as sweep_exec
from budget.analysis.sensitivity import MIN_OVERLAP, sensitivity, sensitivity_json
from budget.analysis.sweep import sweep
from budget.cli import app
from budget.engines.base import QuadraticForm
from budget.report.decisions import sensitivity_view

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
ROOT_PUBLIC = ROOT.parent / "shared" / "qasm-public"
PUBLIC_MODEL = ROOT / "benchmarks" / "public_model.toml"
ONE_SX = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nsx q[0];\n'
PAIR = ('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nfor int i in [0:4] {\n  sx q[0]; sx q[1];\n'
        '  cz q[0], q[1];\n  rz(0.3) q[1];\n}\n')
PAIR_MODEL = ("[gates.sx]\nduration_ns = 30.0\noverrotation = 0.004\naxis_error = 0.002\n"
              "[gates.cz]\nduration_ns = 60.0\ncphase = 0.01\nz_phase = [0.003, -0.002]\n[gates.rz]\nz_phase = 1e-4\n")


def _text(renderable, width: int = 80) -> str:
    console = Console(width=width, color_system=None)
    with console.capture() as out:
        console.print(renderable)
    return out.get()


# --- interference between knobs: no pair at rounding level, labelled "cancel" as -0.000 --------------

def test_weak_overlap_is_not_listed_as_interference():
    """An overlap of 1e-5 printed as "-0.000 … cancel"; now pairs below MIN_OVERLAP are left out of
    the table and of the JSON alike, and every listed overlap reads as a non-zero number."""
    a = np.array([[4.0, -1e-5 * 2 * 3], [-1e-5 * 2 * 3, 9.0]])  # overlap -1e-5
    qf = QuadraticForm((("x", "overrotation"), ("cz", "cphase")), a, np.array([0.01, 0.02]), 0.0, {})
    s = sensitivity(qf)
    assert s.pairs == () and sensitivity_json(s)["interference"] == []
    assert "0.000" not in _text(sensitivity_view(s))
    a[0, 1] = a[1, 0] = -2e-3 * 6  # overlap -0.002: listed, and shown as such
    s = sensitivity(QuadraticForm(qf.labels, a, qf.values_rad, 0.0, {}))
    assert [p.overlap for p in s.pairs] == [pytest.approx(-2e-3)] and "-0.002" in _text(sensitivity_view(s))


def test_overlap_threshold_bounds_the_cross_term():
    """Cauchy-Schwarz: |2 A_fg δ_f δ_g| <= |overlap| (A_ff δ_f² + A_gg δ_g²), so a pair left out
    moves the infidelity by under MIN_OVERLAP of what the two knobs cost alone (seeded forms)."""
    rng = np.random.default_rng(3)
    for _ in range(200):
        m = rng.normal(size=(2, 2))
        a, v = m @ m.T, rng.normal(0, 0.01, 2)
        overlap = a[0, 1] / math.sqrt(a[0, 0] * a[1, 1])
        assert abs(2 * a[0, 1] * v[0] * v[1]) <= abs(overlap) * (a[0, 0] * v[0] ** 2 + a[1, 1] * v[1] ** 2) + 1e-18
    assert MIN_OVERLAP == 1e-3


# --- a sweep where nothing varies: one evaluation, the value itself, no float noise --------------------

def test_sweep_with_nothing_uncertain_is_exact_and_evaluates_once(tmp_path, monkeypatch):
    """Every sample is the same model: the spread is exactly 0 (it printed 1e-19 noise), the value
    is the process infidelity of the over-rotated gate (cirq), and the engine runs once, not 40
    times (a 200-sample sweep took over 100 s on a 4-qubit Trotter loop)."""
    circ = tmp_path / "c.qasm"
    circ.write_text(ONE_SX)
    delta = 0.03
    calls = []
    real = sweep_exec.evaluate
    monkeypatch.setattr(sweep_exec, "evaluate", lambda ctx, chunk: calls.append(len(chunk)) or real(ctx, chunk))
    out = tmp_path / "s.jsonl"
    res = sweep(str(circ), {"gates": {"sx": {"overrotation": delta}}}, samples=40, hours=1.0, hour_points=3,
                workers=1, out=str(out), target=0.5)
    ideal, actual = cirq.unitary(cirq.rx(math.pi / 2)), cirq.unitary(cirq.rx(math.pi / 2 + delta))
    expected = 1 - abs(np.trace(ideal.conj().T @ actual)) ** 2 / 4
    d = res.now
    assert d.mean == pytest.approx(expected, rel=1e-9)
    assert (d.std, d.mean_stderr) == (0.0, 0.0) and d.mean == d.median == d.q05 == d.q95
    assert d.p_meet_target == 1.0 and all(x.std == 0.0 for _, x in res.hours)
    assert sum(calls) == 1
    assert len(out.read_text().splitlines()) == 1 + 40 * 3  # every key still recorded (resume works)
    again = sweep(str(circ), {"gates": {"sx": {"overrotation": delta}}}, samples=40, hours=1.0, hour_points=3,
                  workers=1, out=str(out), target=0.5)
    assert again.now == d and sum(calls) == 1  # resumed from the file: nothing evaluated again


def test_sweep_view_says_nothing_varies(tmp_path):
    circ, model = tmp_path / "c.qasm", tmp_path / "m.toml"
    circ.write_text(ONE_SX)
    model.write_text("[gates.sx]\noverrotation = 0.03\n")
    res = runner.invoke(app, ["sweep", str(circ), "-e", str(model), "--samples", "5", "--workers", "1",
                              "--width", "80"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert "in every sample (nothing varies" in res.output and "e-1" not in res.output


# --- tables at 80 columns: no number cut to "0.0018…" -------------------------------------------------

def test_cost_and_tolerance_tables_readable_at_80_columns(tmp_path):
    """At 80 columns the cost table cut every number ("3.8…", "tig…") and the tolerance table its
    knobs and tolerances; now rows that do not fit become one wrapped block each, and every number
    of the JSON is in the text whole."""
    circ, model, out = tmp_path / "c.qasm", tmp_path / "m.toml", tmp_path / "d.json"
    circ.write_text(PAIR)
    model.write_text(PAIR_MODEL)
    res = runner.invoke(app, ["cost", str(circ), "-e", str(model), "-t", "1e-3", "--open-loop", "--width", "80",
                              "--json", str(out)], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert "…" not in res.output
    text = " ".join(res.output.split())  # the blocks wrap at spaces
    data = json.loads(out.read_text())
    rows = data["tolerances"]
    assert rows and all(r["knob"] in text and f"{r['tolerance_rad']:.4g}" in text for r in rows)
    assert all(k["knob"] in text for k in data["calibration"]["knobs"])
    assert "calibration experiments" in text and "device time:" in text
    wide = runner.invoke(app, ["cost", str(circ), "-e", str(model), "-t", "1e-3", "--open-loop", "--width", "200"],
                         catch_exceptions=False)
    assert "┃ family" in wide.output  # wide terminals keep the table


def test_report_takes_a_width(tmp_path):
    circ, model = tmp_path / "c.qasm", tmp_path / "m.toml"
    circ.write_text(ONE_SX)
    model.write_text("[gates.sx]\noverrotation = 0.03\n")
    res = runner.invoke(app, ["report", str(circ), "-e", str(model), "-t", "0.01", "--out", str(tmp_path / "r"),
                              "--max-cycles", "10", "--points", "2", "-q", "--width", "200"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert max(len(line) for line in res.output.splitlines()) > 80  # one line, not wrapped at the default


# --- stim's own memory circuit: leading resets and the logical-observable line ------------------------

def _stim_repetition(tmp_path: Path) -> tuple[Path, Path, int]:
    c = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=3, after_clifford_depolarization=0)
    circ, model = tmp_path / "rep3.qasm", tmp_path / "m.toml"
    circ.write_text(c.to_qasm(open_qasm_version=3, skip_dets_and_obs=True))
    model.write_text("[qubits]\nt1_us = 100.0\nt2_us = 80.0\nreadout_error = 0.01\n"
                     "[gates.cx]\nduration_ns = 40.0\navg_infidelity = 0.005\n")
    return circ, model, c.num_observables


def test_leading_reset_is_named_without_calling_it_mid_circuit(tmp_path):
    """stim's memory circuits start with resets; the gate metrics refuse them in one line that names
    the reset and its line, without calling a first statement 'the middle of the circuit'."""
    circ, model, _ = _stim_repetition(tmp_path)
    res = runner.invoke(app, ["analyze", str(circ), "-e", str(model)])
    assert res.exit_code == 2
    line = res.output.strip()
    assert "\n" not in line and "rep3.qasm:" in line and "reset" in line and "middle" not in line
    assert "--metric detectors" in line


def test_logical_observable_line_counts_observables_like_stim(tmp_path):
    """The detectors view says how many logical observables were inferred; stim's generator declares
    the same number for its memory circuit (one for the repetition code), and the JSON agrees."""
    circ, model, declared = _stim_repetition(tmp_path)
    out = tmp_path / "d.json"
    res = runner.invoke(app, ["analyze", str(circ), "-e", str(model), "--metric", "detectors", "--json", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert len(data["logical_observables"]) == declared == 1
    text = " ".join(res.output.split())
    assert f"{declared} logical observable " in text


# --- incoherent errors under an if block: never silently dropped -----------------------------------------

FEED = """OPENQASM 2.0;
include "qelib1.inc";
qreg q[1];
creg c[1];
creg d[1];
x q[0];
measure q[0] -> c[0];
if (c==1) y q[0];
measure q[0] -> d[0];
"""


def test_incoherent_error_under_if_exact_value_and_clifford_warning(tmp_path):
    """y under `if (c==1)` brings |1> back to |0>; with average gate infidelity r on y (a
    depolarizing channel), the final bit flips with probability r: X and Y flip a Z measurement,
    each with probability p/3 where r = 2p/3 (F_avg = (d F_pro + 1)/(d + 1), Nielsen, Phys. Lett. A
    303, 249 (2002)). The exact engine gives it; the clifford engine cannot condition stim noise on
    a recorded bit, so it must say that it leaves the error out (never a silent 0)."""
    r = 0.003
    circ, model = tmp_path / "ff.qasm", tmp_path / "m.toml"
    circ.write_text(FEED)
    model.write_text(f"[gates.y]\navg_infidelity = {r}\n")
    out = {}
    for engine in ("exact", "clifford"):
        path = tmp_path / f"{engine}.json"
        res = runner.invoke(app, ["analyze", str(circ), "-e", str(model), "--metric", "detectors",
                                  "--engine", engine, "--json", str(path)])
        assert res.exit_code == 0, res.output
        out[engine] = json.loads(path.read_text())
    assert out["exact"]["actual"]["infidelity"] == pytest.approx(r, rel=1e-9)
    assert not any("under if blocks" in w for w in out["exact"]["warnings"])
    assert any("under if blocks (line 8)" in w for w in out["clifford"]["warnings"])


def test_every_command_refuses_a_bad_calibration_table_the_same_way(tmp_path):
    """A misspelt [calibration] key was accepted by `analyze` and refused by `tolerances`; every
    command reads the model through one path, so both give the same one line (exit 2, no JSON)."""
    circ, model = tmp_path / "one.qasm", tmp_path / "m.toml"
    circ.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nx q[0];\n')
    model.write_text("[gates.x]\noverrotation = 0.01\n[calibration]\nshots = -3\n")
    lines = set()
    for args in (["analyze"], ["tolerances", "-t", "0.01"], ["cost", "-t", "0.01"]):
        out = tmp_path / f"{args[0]}.json"
        res = runner.invoke(app, [args[0], str(circ), "-e", str(model), *args[1:], "--json", str(out)])
        assert res.exit_code == 2 and not out.exists(), res.output
        lines.add(" ".join(res.output.split()))
    assert len(lines) == 1 and "calibration.shots" in lines.pop()


def test_tolerances_without_coherent_knobs_says_so_instead_of_an_empty_table(tmp_path):
    """A model with only incoherent errors has no knob to tolerance: one plain sentence, no empty
    sensitivity table (its floor is the cx error rate itself, first order: common practice, no source)."""
    circ, model = tmp_path / "bell.qasm", tmp_path / "m.toml"
    circ.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0];\ncx q[0],q[1];\n')
    model.write_text("[gates.cx]\navg_infidelity = 0.001\n")
    res = runner.invoke(app, ["tolerances", str(circ), "-e", str(model), "-t", "0.01"])
    assert res.exit_code == 0, res.output
    assert "no coherent knob in this model" in res.output and "A_ff" not in res.output


def test_depth_curve_at_one_cycle_is_the_headline_value(tmp_path):
    """On a small circuit whose incoherent errors already pass the first-order range at N = 1, the
    depth curve's N = 1 point and `analyze` (exact engine) must be the same number, not the
    first-order 0.9 beside the exact 0.59 (two views of one quantity)."""
    circ, model = tmp_path / "c.qasm", tmp_path / "m.toml"
    circ.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[4];\n'  # 4 qubits: the closed form, then exact
                    + "h q[0];\ncx q[0],q[1];\ncx q[2],q[3];\nrx(0.2) q[1];\n" * 6)
    model.write_text("[gates.cx]\navg_infidelity = 0.03\noverrotation = 0.02\n[gates.rx]\navg_infidelity = 0.01\n")
    a, d = tmp_path / "a.json", tmp_path / "d.json"
    assert runner.invoke(app, ["analyze", str(circ), "-e", str(model), "--json", str(a)]).exit_code == 0
    assert runner.invoke(app, ["depth", str(circ), "-e", str(model), "--max-cycles", "20", "--json", str(d)]).exit_code == 0
    head, curve = json.loads(a.read_text()), json.loads(d.read_text())
    assert head["engine"] == "exact" and head["actual"]["infidelity"] > 0.05
    ns = curve["repetitions"]
    assert ns[0] == 1
    assert curve["actual"][0] == pytest.approx(head["actual"]["infidelity"], rel=1e-9)


def test_worst_case_bound_that_is_reached_prints_no_rounding_noise(tmp_path):
    """cat_n35 with the public model: the Delorme–Poljak bound equals a sign setting the search
    finds, so the note said '2.22e-14 % above'; it must say the bound is reached instead."""
    public = ROOT_PUBLIC / "cat_n35.qasm"
    if not public.exists():
        pytest.skip("../shared/qasm-public is not beside the repository")
    res = runner.invoke(app, ["tolerances", str(public), "-e", str(PUBLIC_MODEL), "-t", "0.05"])
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "e-1" not in text.split("interfering knobs")[1][:200]
    assert "a sign setting reaches it" in text
