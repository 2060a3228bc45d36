"""One verdict, one place: the rules of budget.analysis.verdict in one table, rendered by every view.

Each row is a budget (naive, accumulated, twirled, beyond range) with the verdict it must get. For
each row the terminal view, the JSON, the Markdown and HTML reports and the family-shares picture
are rendered, and each must carry the same words (the sentence of ``BudgetResult.verdict``). The
band of ±20 % around a ratio of 1 is a convention of this tool (common practice, no source).
"""

from __future__ import annotations

import html
import re

import numpy as np
import pytest

from budget.analysis.compare import Comparison
from budget.analysis.heatmap import ErrorMap
from budget.analysis.ratios import BOTH_ROUNDING, DENOMINATOR_ROUNDING, safe_ratio
from budget.analysis.result import BudgetResult, FamilyShare, ReadoutSummary
from budget.analysis.verdict import classify
from budget.report.content import ReportData
from budget.report.html import render_html
from budget.report.markdown import render_markdown
from budget.report.render import figures
from budget.report.terminal import make_console, render_budget
from budget.report.terminal_views import render_comparison

# (naive, accumulated, twirled, beyond_range) -> (kind, structure, words that must appear, words that must not)
ROWS = [
    ((0.01, 0.0121, None, None), ("build-up", None, "1.21x what the fidelity product predicts", "fair guide")),
    ((0.01, 0.0119, None, None), ("fair", None, "fair guide here (1.19x)", "build-up")),
    ((0.01, 0.0080, None, None), ("cancellation", None, "only 0.8x", "fair guide")),
    # the structured circuit beats the naive product but its twirled variant is better still (issue 9 item 8)
    ((0.01, 0.0050, 0.0030, None), ("cancellation", "hurts", "the structure hurts", "echoes errors away")),
    ((0.01, 0.0050, 0.0100, None), ("cancellation", "helps", "echoes errors away", "hurts")),
    ((0.01, 0.0110, 0.0100, None), ("fair", "neutral", "the structure is neutral", "hurts")),
    ((0.01, 0.0300, 0.0100, None), ("build-up", "hurts", "randomised compiling would help", "fair guide")),
    ((2.7e-15, 3e-16, None, None), ("no-error", None, "no error above rounding level", "x what")),
    ((0.0, 0.02, None, None), ("build-up", None, "predicts no loss", "fair guide")),
    ((0.3, 1.0, None, "sum reaches 9.96"), ("beyond-range", None, "beyond the first-order range (sum reaches 9.96)",
                                          "fair guide")),
]


def _result(naive, accumulated, twirled, beyond) -> BudgetResult:
    return BudgetResult(
        source="table.qasm", qubits=1, operations=3, layers=3, cycles=1, metric="process", engine="exact",
        naive_infidelity=naive, actual_infidelity=accumulated, first_order=None,
        families=(FamilyShare("x", 3, accumulated),), readout=ReadoutSummary({}, 0.0),
        twirled_infidelity=twirled, beyond_range=beyond,
    )


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def _terminal(r: BudgetResult) -> str:
    console = make_console(width=400, color=False)
    with console.capture() as cap:
        console.print(render_budget(r))
    return _flat(re.sub(r"[│╭╮╰╯─]", " ", cap.get()))


def _svg_text(svg: str) -> str:
    """The visible text of an SVG (text stays text: svg.fonttype none), lines joined by spaces."""
    return _flat(" ".join(html.unescape(t) for t in re.findall(r"<text[^>]*>([^<]*)</text>", svg)))


@pytest.mark.parametrize("row, expected", ROWS, ids=[e[0] + "-" + str(e[1]) for _, e in ROWS])
def test_every_view_tells_the_same_verdict(row, expected):
    kind, structure, must, must_not = expected
    r = _result(*row)
    v = r.verdict
    assert (v.kind, v.structure) == (kind, structure)
    assert must in v.words and must_not not in v.words
    views = {"terminal": _terminal(r)}
    d = r.to_dict()
    assert d["verdict"]["kind"] == kind and d["verdict"]["structure"] == structure
    views["json"] = d["verdict"]["words"]
    data = ReportData(result=r, target=0.5, curve=None,
                      emap=ErrorMap(("q[0]",), ("L1",), np.array([[max(row[0], 1e-3)]])), model_source="m.toml")
    figs = figures(data)
    views["markdown"] = _flat(render_markdown(data, figs))
    views["html"] = _flat(html.unescape(re.sub(r"<[^>]+>", " ", render_html(data, figs))))
    if r.in_range:
        views["plot"] = _svg_text(figs["family-shares"])
    for name, text in views.items():
        assert v.words in text, f"{name} view lacks the verdict {v.words!r}"
        assert must_not not in text.replace(v.words, ""), f"{name} view says {must_not!r} elsewhere"


def test_beyond_range_gives_no_number_and_no_target_judgement():
    r = _result(0.3, 1.0, None, "sum reaches 9.96")
    d = r.to_dict()
    assert d["actual"]["infidelity"] is None and d["actual"]["in_range"] is False
    assert d["coherent_amplification"] is None and d["families"][0]["share"] is None
    data = ReportData(result=r, target=0.5, curve=None, emap=ErrorMap(("q[0]",), ("L1",), np.array([[0.1]])))
    md = render_markdown(data, figures(data))
    assert "cannot be judged against the target" in md and "meets the target" not in md
    assert "| actual | beyond range |" in md


def test_ratios_of_rounding_noise_are_not_ratios():
    # the case of issue 9 item 5: 0.0961 against 2.7e-15 is no "ratio 3.56e+13"
    assert safe_ratio(0.0961, 2.7e-15).value is None and safe_ratio(0.0961, 2.7e-15).why == DENOMINATOR_ROUNDING
    assert safe_ratio(3e-16, 2.7e-15).why == BOTH_ROUNDING
    assert safe_ratio(2.7e-15, 0.0961).value == 0.0
    assert safe_ratio(0.0242, 0.02).value == pytest.approx(1.21)
    a, b = _result(0.05, 0.0961, None, None), _result(2.6e-15, 2.7e-15, None, None)
    c = Comparison(a, b)
    assert c.ratio is None and c.to_dict()["ratio_note"] == DENOMINATOR_ROUNDING
    console = make_console(width=200, color=False)
    with console.capture() as cap:
        console.print(render_comparison(c))
    assert "not meaningful" in cap.get() and "e+13" not in cap.get()
    assert b.coherent_amplification is None and b.verdict.kind == "no-error"


def test_classify_takes_plain_numbers():
    assert classify(0.01, 0.0121).amplification.value == pytest.approx(1.21)
    assert classify(0.01, None).kind == "beyond-range"
