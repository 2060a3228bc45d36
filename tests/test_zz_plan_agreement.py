"""Static ZZ in `budget plan` and `budget tolerances` (issue 14): a calibration measures a static
coupling but does not lower it, so both commands schedule no calibration for it and say what would
lower it; plan states its sign assumption (random) against tolerances' default (worst).

Reference value (issue 14's worked formula, checked there against cirq): two qubits idle for
T = 800 ns with ζ = 20 kHz pick up φ = 2π·ζ·T = 0.1005 rad, and the process infidelity of
diag(1, 1, 1, e^{iφ}) is 1 - |3 + e^{iφ}|²/16 = 3φ²/16 to leading order."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from budget.analysis.decide import decide
from budget.analysis.plan import plan, schedule_json
from budget.problems import InputError

ROOT = Path(__file__).resolve().parents[1] / "circuits"
CIRCUIT, MODEL = str(ROOT / "pair_memory_zz.qasm"), str(ROOT / "fen_pair_zz.toml")
PHI = 2 * math.pi * 20e3 * 800e-9


def test_plan_keeps_static_zz_as_the_hardware_sets_it():
    s = plan(CIRCUIT, MODEL, target=0.05, hours=24)
    (zz,) = [k for k in s.knobs if k.family == "zz q[0],q[1]"]
    assert zz.action == "hardware" and zz.device_s == 0 and zz.sigma_rad is None
    assert zz.per_rad2 * zz.mean_square_rad2 == pytest.approx(3 * PHI**2 / 16, rel=1e-6)
    data = schedule_json(s)
    assert any("random" in n and "worst" in n for n in data["notes"])
    assert any("static ZZ (zz q[0],q[1])" in n and "echo" in n for n in data["notes"])


def test_plan_and_tolerances_agree_when_the_zz_must_fall():
    """At a target that the floor and today's ZZ miss, tolerances asks for a lower ZZ and schedules
    no calibration for it; plan refuses with the same reason."""
    target = 0.0125
    d = decide(CIRCUIT, MODEL, target=target)
    (row,) = [r for r in d.tolerances.rows if r.family == "zz q[0],q[1]"]
    assert row.status == "tighten"
    notes = [w for w in d.tolerances.warnings if "static ZZ must fall from 20 to" in w]
    assert len(notes) == 1 and "echo" in notes[0] and "budget plan" in notes[0]
    assert not d.plan.knobs and "zz q[0],q[1].zz_rad_per_us" in d.plan.unplanned
    with pytest.raises(InputError, match=r"static ZZ \(zz q\[0\],q\[1\] at .*20 kHz\) already give"):
        plan(CIRCUIT, MODEL, target=target, hours=24)
