"""The report's sentences agree with each other: meeting a target and being told to tighten are not
said in one breath; when the depth curve and the headline come from different engines, the report
says which engine gave which number (issue 9 items 9 and 10).

The numbers themselves are checked elsewhere (test_exact.py against cirq, test_depth.py against the
closed forms); here only the logic of the words is checked, on the invented North Fen examples.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from budget.report.content import gather, summary_words
from budget.report.markdown import render_markdown
from budget.report.render import figures

ROOT = Path(__file__).resolve().parent.parent / "circuits"


@pytest.fixture(scope="module")
def parity():
    return {t: gather(str(ROOT / "parity_cycle.qasm"), str(ROOT / "fen_q8.toml"), target=t, max_cycles=100, points=5)
            for t in (0.0175, 0.3, 0.01)}


def test_meeting_the_target_is_never_followed_by_to_meet_it(parity):
    for target, data in parity.items():
        words = summary_words(data)
        meets = data.result.actual <= target
        assert ("meets the target" in words) == meets
        if meets:
            assert "To meet it" not in words
        tighten = [r for r in data.tolerances.rows if r.status == "tighten"] if data.tolerances.feasible else []
        if meets and tighten:
            assert "to keep meeting it whatever the signs" in words
        if not meets and data.tolerances.feasible and tighten:
            assert "To meet it, tighten" in words


def test_report_names_the_engine_of_the_curve_and_of_the_headline(parity):
    data = parity[0.3]
    md = render_markdown(data, figures(data))
    r, c = data.result, data.curve
    assert r.engine == "exact" and c.engine.startswith("generators")
    assert f"actual ({c.engine})" in md  # the depth table's column says which engine
    assert "comes from the exact engine" in md and "the headline value is the one to use" in md


def test_no_readout_line_when_the_model_has_no_readout_error(tmp_path):
    """A model without readout error says nothing about misreads (it used to print
    'P(any misread) = 0' for every qubit); a model with one gives 1 - Π(1 - p_q)."""
    from typer.testing import CliRunner

    from budget.cli import app

    qasm = tmp_path / "c.qasm"
    qasm.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0];\ncx q[0],q[1];\n')
    bare = tmp_path / "bare.toml"
    bare.write_text("[gates.h]\noverrotation = 0.01\n")
    read = tmp_path / "read.toml"
    read.write_text("[qubits]\nreadout_error = 0.02\n[gates.h]\noverrotation = 0.01\n")
    runner = CliRunner()
    out = runner.invoke(app, ["analyze", str(qasm), "-e", str(bare), "--width", "200"]).output
    assert "misread" not in out
    out = runner.invoke(app, ["analyze", str(qasm), "-e", str(read), "--width", "200"]).output
    assert "P(any misread) = 0.0396" in out  # 1 - 0.98² = 0.0396 (two qubits measured at the end)
