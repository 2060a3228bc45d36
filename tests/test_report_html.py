"""The report: content, Markdown tables, a self-contained HTML page checked in a real browser.

Outside references: design.md §6 closed forms for the per-cell values of the error map; the
markdown-it-py parser (CommonMark + tables) for the Markdown; Python's html.parser for the page's
structure; Debian's chromium (headless) for rendering, console errors and a screenshot kept in
test-artifacts/.
"""

from __future__ import annotations

import io
import math
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest
from markdown_it import MarkdownIt
from typer.testing import CliRunner

from budget.analysis.heatmap import error_map
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.cli import app
from budget.errors.attach import attach
from budget.errors.fidelity import naive_infidelity
from budget.errors.model import ErrorModel
from budget.report.content import gather, num
from budget.report.progress import progress_bar, wants_progress
from budget.report.render import report_files
from budget.report.blocks import Table, Tiles
from budget.report.sections import build

ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = ROOT / "test-artifacts"
MODEL = {
    "qubits": {"t1_us": 60.0, "t2_us": 50.0, "readout_error": 0.01},
    "gates": {
        "sx": {"duration_ns": 25.0, "overrotation": 0.01, "avg_infidelity": 2e-4},
        "cz": {"duration_ns": 50.0, "cphase": 0.03, "avg_infidelity": 2e-3},
    },
}


def _circuit() -> StructuredCircuit:
    return StructuredCircuit(
        ("q[0]", "q[1]"),
        (Repeat((Layer((Operation("sx", (0,)), Operation("sx", (1,)))), Layer((Operation("cz", (0, 1)),))), 3),),
        source="two_qubit_cycle.qasm",
    )


@pytest.fixture(scope="module")
def data():
    model = ErrorModel.from_dict(MODEL, source="fen_q8_pair_test.toml")  # an invented test model
    return gather(_circuit(), model, target=0.01, cycles=4, max_cycles=300, points=12)


@pytest.fixture(scope="module")
def files(data):
    return report_files(data)


def _key_numbers(data) -> list[str]:
    r = data.result
    return [num(r.naive_infidelity), num(r.actual_infidelity), num(r.twirled_infidelity), "0.01"]


def test_error_map_cells_match_closed_forms():
    # one over-rotated sx: 1 - F_pro = sin²(δ/2); a cz with a conditional-phase offset φ:
    # 1 - (10 + 6 cos φ)/16, split over its two qubits (design.md §6)
    c = StructuredCircuit(("a", "b", "c"), (Layer((Operation("sx", (0,)),)), Repeat((Layer((Operation("cz", (1, 2)),)),), 7)))
    noisy = attach(c, ErrorModel.from_dict({"gates": {"sx": {"overrotation": 0.02}, "cz": {"cphase": 0.1}}}))
    m = error_map(noisy)
    assert m.columns == ("L1", "L2 ×7")
    assert m.values[0, 0] == pytest.approx(math.sin(0.01) ** 2, rel=1e-9)
    cz = 1 - (10 + 6 * math.cos(0.1)) / 16
    assert m.values[1, 1] == pytest.approx(7 * cz / 2, rel=1e-9) and m.values[2, 1] == pytest.approx(7 * cz / 2, rel=1e-9)
    assert m.values[0, 1] == 0 and m.values[1, 0] == 0
    # the map total is the first-order form of the naive estimate: Σ m e ≈ -log(1 - naive)
    assert m.total == pytest.approx(-math.log1p(-naive_infidelity(noisy)), rel=1e-3)


def test_summary_says_what_a_lead_needs(data):
    text = build(data, {})[0].text
    r = data.result
    for piece in ("two_qubit_cycle.qasm", "2 qubits", num(r.naive_infidelity), num(r.actual_infidelity), "target"):
        assert piece in text
    assert ("meets" in text) == (r.actual_infidelity <= 0.01)
    if data.tolerances is not None and any(row.status == "tighten" for row in data.tolerances.rows):
        assert "tighten" in text


def test_markdown_tables_are_well_formed(data, files):
    md = files["report.md"]
    for n in _key_numbers(data):
        assert n in md
    tokens = MarkdownIt("commonmark").enable("table").parse(md)
    blocks = [b for b in build(data, {}) if isinstance(b, (Table, Tiles))]
    assert sum(t.type == "table_open" for t in tokens) == len(blocks) >= 6
    # every row of every table has as many cells as its header
    widths, row = [], 0
    for t in tokens:
        if t.type == "tr_open":
            row = 0
        elif t.type in ("th_open", "td_open"):
            row += 1
        elif t.type == "tr_close":
            widths.append(row)
        elif t.type == "table_close":
            assert len(set(widths)) == 1, widths
            widths = []
    for name in ("depth-curves", "family-shares", "error-map"):
        assert f"({name}.svg)" in md and f"{name}.svg" in files


class _Structure(HTMLParser):
    VOID = {"meta", "br", "img", "hr", "link", "input", "path", "rect", "use", "stop", "circle", "line", "ellipse",
            "polygon", "polyline"}

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.ids, self.text = [], [], [], []

    def handle_starttag(self, tag, attrs):
        for k, v in attrs:
            if k == "id":
                self.ids.append(v)
            if k in ("src", "href", "xlink:href") and v and not v.startswith(("#", "data:")):
                self.errors.append(f"external reference {k}={v}")
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in self.VOID:
            self.stack.pop()

    def handle_endtag(self, tag):
        if tag in self.VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> does not close <{self.stack[-1] if self.stack else '-'}>")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def test_html_is_self_contained_and_balanced(data, files):
    page = files["report.html"]
    p = _Structure()
    p.feed(page)
    assert not p.errors and not p.stack
    assert len(p.ids) == len(set(p.ids))  # ids of the three inline figures do not clash
    assert page.count("<svg") == 3 and "Content-Security-Policy" in page
    assert not re.search(r"url\((?!#)|@import|<script|<link", page)
    text = " ".join(p.text)
    for n in _key_numbers(data):
        assert n in text


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome", "chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


def _browse(binary: str, page: Path, profile: Path, *extra: str) -> subprocess.CompletedProcess:
    args = [binary, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0", *extra, page.as_uri()]
    return subprocess.run(args, capture_output=True, text=True, timeout=120)


def test_page_renders_in_a_real_browser(data, files, tmp_path):
    binary = _chromium()
    if binary is None:
        pytest.skip("no chromium binary on PATH (.ci/run installs Debian's chromium); browser check not run")
    folder = tmp_path / "report"
    folder.mkdir()
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
    page = folder / "report.html"
    dom = _browse(binary, page, tmp_path / "profile-dom", "--dump-dom")
    assert dom.returncode == 0, dom.stderr[-2000:]
    console = [line for line in dom.stderr.splitlines() if ":CONSOLE" in line]
    assert not console, console  # no script errors, no blocked network requests
    for n in _key_numbers(data):
        assert n in dom.stdout
    assert dom.stdout.count("<svg") == 3 and "Error budget" in dom.stdout
    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / "report.png"
    res = _browse(binary, page, tmp_path / "profile-shot", f"--screenshot={shot}", "--window-size=1200,2600",
                  "--hide-scrollbars")
    assert res.returncode == 0 and shot.exists() and shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert shot.stat().st_size > 50_000  # a rendered page with pictures, not a blank image
    # control: the same detector sees a page that breaks the rules
    bad = tmp_path / "bad.html"
    bad.write_text(page.read_text().replace("</main>", '<img src="http://example.invalid/x.png"></main>'))
    res = _browse(binary, bad, tmp_path / "profile-bad", "--dump-dom")
    assert any(":CONSOLE" in line for line in res.stderr.splitlines())


def test_report_command_writes_the_folder(tmp_path):
    circuits = ROOT / "circuits"
    out = tmp_path / "rep"
    res = CliRunner().invoke(app, ["report", str(circuits / "echo_xy4.qasm"), "-e", str(circuits / "fen_q8.toml"),
                                   "--target", "0.01", "--out", str(out), "--cycles", "3", "--max-cycles", "100",
                                   "--points", "5"])
    assert res.exit_code == 0, res.output
    assert sorted(p.name for p in out.iterdir()) == ["depth-curves.svg", "error-map.svg", "family-shares.svg",
                                                     "report.html", "report.md"]
    # bad input: one line, exit code 2, no folder
    bad = tmp_path / "nope"
    res = CliRunner().invoke(app, ["report", str(circuits / "echo_xy4.qasm"), "-e", str(circuits / "fen_q8.toml"),
                                   "--target", "3", "--out", str(bad)])
    assert res.exit_code == 2 and "target" in res.output and not bad.exists()
    res = CliRunner().invoke(app, ["report", str(circuits / "echo_xy4.qasm"), "-e", str(circuits / "fen_q8.toml"),
                                   "--target", "0.01", "--out", str(tmp_path / "no" / "such")])
    assert res.exit_code == 2 and "does not exist" in res.output


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_bar_only_on_a_terminal():
    assert not wants_progress(quiet=False, stream=io.StringIO())
    assert not wants_progress(quiet=True, stream=_Tty())
    with progress_bar("work", quiet=True, stream=_Tty()) as cb:
        assert cb is None
    tty = _Tty()
    with progress_bar("work", stream=tty) as cb:
        assert cb is not None
        cb(1, 2)
        cb(2, 2)
    assert "work" in tty.getvalue()
