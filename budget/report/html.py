"""The report as one self-contained HTML page: inline CSS, inline SVG figures, no scripts.

Nothing is fetched from the network when the page is opened (a Content-Security-Policy forbids it),
so the file can be mailed or archived with a run's data and still read in any browser.
"""

from __future__ import annotations

from html import escape

from budget.report.content import ReportData, short_name
from budget.report.blocks import Block, Figure, Heading, Para, Table, Tiles
from budget.report.sections import build

_CSS = """
:root { --paper:#faf8f4; --ink:#22303c; --soft:#5d6b77; --line:#e2ddd3; --rust:#b5472f; --slate:#3d6f8e;
        --moss:#6b8f3a; --band:#22303c; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font: 15px/1.55 system-ui, -apple-system, "Segoe UI", "DejaVu Sans", sans-serif; }
header { background:var(--band); color:#f4efe6; padding:28px 0 22px; }
header .wrap, main { max-width: 980px; margin: 0 auto; padding: 0 28px; }
header h1 { margin:0 0 6px; font-size:26px; font-weight:650; letter-spacing:.2px; }
header p { margin:0; color:#c9c2b6; font-size:14px; }
nav { margin-top:14px; font-size:13px; }
nav a { color:#f0c987; text-decoration:none; margin-right:16px; }
main { padding-top: 22px; padding-bottom: 40px; }
h2 { font-size:19px; margin:36px 0 10px; padding-bottom:6px; border-bottom:2px solid var(--line); }
p { margin: 8px 0; }
p.summary { font-size:17px; line-height:1.6; background:#fff; border-left:5px solid var(--slate);
            padding:16px 20px; border-radius:0 6px 6px 0; box-shadow:0 1px 2px rgba(0,0,0,.06); }
p.note { color:var(--soft); font-size:14px; }
p.note::before { content:"Note · "; font-weight:600; }
p.warning { background:#fbefe3; border:1px solid #efcfae; padding:8px 12px; border-radius:6px; font-size:14px; }
p.warning::before { content:"Check · "; font-weight:650; color:var(--rust); }
p.caution { margin-top:34px; padding:14px 18px; border:1px dashed var(--soft); border-radius:6px;
            color:var(--soft); font-size:14px; }
.tiles { display:grid; grid-template-columns:repeat(auto-fit, minmax(170px, 1fr)); gap:12px; margin:18px 0 6px; }
.tile { background:#fff; border:1px solid var(--line); border-radius:8px; padding:12px 14px; }
.tile .label { font-size:12px; text-transform:uppercase; letter-spacing:.6px; color:var(--soft); }
.tile .value { font-size:24px; font-weight:650; font-variant-numeric:tabular-nums; margin:2px 0; }
.tile .why { font-size:12.5px; color:var(--soft); }
.tile.good { border-top:4px solid var(--moss); } .tile.good .value { color:#4a6a22; }
.tile.bad { border-top:4px solid var(--rust); } .tile.bad .value { color:var(--rust); }
table { border-collapse:collapse; margin:10px 0 14px; font-size:14px; background:#fff;
        border:1px solid var(--line); }
th { text-align:left; font-weight:600; background:#f1ede5; padding:6px 12px; border-bottom:1px solid var(--line); }
td { padding:5px 12px; border-bottom:1px solid #efebe4; }
td:first-child, td:nth-child(2) { white-space:nowrap; }
td.num, th.num { text-align:right; font-variant-numeric:tabular-nums; }
tr:last-child td { border-bottom:none; }
figure { margin:12px 0 16px; background:#fff; border:1px solid var(--line); border-radius:8px; padding:12px; }
figure svg { max-width:100%; height:auto; display:block; margin:0 auto; }
figcaption { font-size:13px; color:var(--soft); margin-top:6px; }
footer { color:var(--soft); font-size:12.5px; max-width:980px; margin:0 auto; padding:0 28px 30px; }
"""

_NAV = (("depth", "Depth"), ("families", "Families"), ("map", "Error map"), ("tolerances", "Tolerances"),
        ("calibration", "Calibration"), ("model", "Model"), ("engine", "Engine"))


def render_block(block: Block) -> str:
    if isinstance(block, Heading):
        return f'<h2 id="{escape(block.anchor)}">{escape(block.text)}</h2>'
    if isinstance(block, Para):
        return f'<p class="{escape(block.kind)}">{escape(block.text)}</p>'
    if isinstance(block, Table):
        def cls(i: int) -> str:
            return ' class="num"' if i < len(block.numeric) and block.numeric[i] else ""

        head = "".join(f"<th{cls(i)}>{escape(h)}</th>" for i, h in enumerate(block.header))
        rows = "".join(
            "<tr>" + "".join(f"<td{cls(i)}>{escape(c)}</td>" for i, c in enumerate(row)) + "</tr>" for row in block.rows
        )
        return f"<table><thead><tr>{head}</tr></thead><tbody>{rows}</tbody></table>"
    if isinstance(block, Figure):
        return f"<figure>{block.svg}<figcaption>{escape(block.caption)}</figcaption></figure>"
    if isinstance(block, Tiles):
        cards = "".join(
            f'<div class="tile {escape(tone)}"><div class="label">{escape(a)}</div>'
            f'<div class="value">{escape(b)}</div><div class="why">{escape(c)}</div></div>'
            for a, b, c, tone in block.items
        )
        return f'<div class="tiles">{cards}</div>'
    raise TypeError(f"unknown report block {type(block).__name__}")


def render_html(data: ReportData, figures: dict[str, str]) -> str:
    """The whole page as one string (UTF-8)."""
    r = data.result
    sub = (
        f"circuit {short_name(r.source)} · error model {short_name(data.model_source)} · "
        f"{r.metric} infidelity · engine {r.engine} · target {data.target:g}"
    )
    nav = "".join(f'<a href="#{a}">{escape(t)}</a>' for a, t in _NAV)
    body = "\n".join(render_block(b) for b in build(data, figures))
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; "
        "img-src data:\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>{escape(data.title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f"<header><div class=\"wrap\"><h1>{escape(data.title)}</h1><p>{escape(sub)}</p><nav>{nav}</nav></div></header>\n"
        f"<main>\n{body}\n</main>\n"
        "<footer>Written by budget, error budgets for structured quantum circuits.</footer>\n"
        "</body>\n</html>\n"
    )
