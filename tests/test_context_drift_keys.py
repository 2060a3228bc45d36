"""Drift keys for context families are knobs of the model, whether or not the circuit uses them.

A lab writes one `[calibration.drift_rad_per_hour]` table for its device and runs many circuits
with it; a key for a knob the model has but this circuit does not use is ignored, a key for a knob
the model does not have is an error (docs/tolerances.md). The context sections (docs/error-model.md,
"Context errors") define knobs too: `zz.zz_rad_per_us`, `crosstalk.rotation`, `bleed.rotation` and
each `[[context]]` table's knobs under its family.
"""

from __future__ import annotations

import math
import re

import pytest

from budget.analysis.decide import decide
from budget.problems import ModelError

ONE_QUBIT = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nx q[0];\nx q[0];\n'
PAIR = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nx q[0];\nx q[0];\ncz q[0], q[1];\n'

CONTEXT_MODEL = {
    "qubits": {"t1_us": 100.0, "t2_us": 80.0},
    "gates": {"x": {"duration_ns": 40.0, "overrotation": 0.004}, "sx": {"duration_ns": 20.0},
              "cz": {"duration_ns": 60.0, "cphase": 0.01}},
    "couplings": {"q[0],q[1]": {"zz_khz": 50.0}},
    "crosstalk": {"q[0]->q[1]": {"fraction": 0.02, "gates": ["sx"]}},
    "bleed": {"sx->x": {"fraction": 0.01}},
    "context": [{"name": "busy", "gate": "cz", "all_driven": True, "cphase": 0.02}],
}


def _model(drift: dict) -> dict:
    return {**CONTEXT_MODEL, "calibration": {"drift_rad_per_hour": drift}}


def _write(tmp_path, text: str):
    path = tmp_path / "c.qasm"
    path.write_text(text)
    return path


@pytest.mark.parametrize("key", [
    "zz.zz_rad_per_us", "zz q[0],q[1].zz_rad_per_us", "zz q[1],q[0].zz_rad_per_us",
    "crosstalk.rotation", "crosstalk sx q[0]->q[1].rotation", "bleed.rotation", "cz [busy].cphase",
])
def test_context_drift_keys_accepted_when_the_circuit_does_not_use_them(tmp_path, key):
    # x, x on q[0] only: no sx (no crosstalk, no bleed), no cz (no context table); the ZZ pair idles
    # but the key must be accepted by the model's own knobs, whichever the circuit exercises.
    d = decide(_write(tmp_path, ONE_QUBIT), _model({key: 0.001}), target=0.01)
    assert "x" in {row.family for row in d.tolerances.rows}


def test_zz_drift_key_is_accepted_but_the_coupler_is_not_calibrated(tmp_path):
    # Same circuit with a cz: the pair q[0],q[1] idles during the two x layers, so the ZZ knob is
    # used and its drift key is accepted; but a static coupling is set by the hardware (a
    # calibration measures it, it does not lower it; docs/methods.md, "Calibration schedule"), so
    # the calibration cost schedules no experiment for it and says why.
    rate = 0.05
    d = decide(_write(tmp_path, PAIR), _model({"zz.zz_rad_per_us": rate}), target=0.05)
    (row,) = [r for r in d.tolerances.rows if r.knob == "zz_rad_per_us"]
    assert row.family == "zz q[0],q[1]"
    assert row.current_rad == pytest.approx(2 * math.pi * 0.050)  # 2π·ζ·1 µs, ζ = 50 kHz
    assert not [k for k in d.plan.knobs if k.knob == "zz_rad_per_us"]
    assert "not lowered by calibration" in d.plan.unplanned["zz q[0],q[1].zz_rad_per_us"]


@pytest.mark.parametrize("key, hint", [
    ("zz.zz_rad_per_ms", "zz.zz_rad_per_us"),
    ("bleed.rotaton", "bleed.rotation"),
    ("cz [idle].cphase", "cz [busy].cphase"),
])
def test_misspelt_context_drift_keys_refused(tmp_path, key, hint):
    with pytest.raises(ModelError, match=rf"the model has no knob .*did you mean '{re.escape(hint)}'"):
        decide(_write(tmp_path, ONE_QUBIT), _model({key: 0.001}), target=0.01)
