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
