"""The report as Markdown (CommonMark with pipe tables); figures are SVG files beside it."""

from __future__ import annotations

from budget.report.content import ReportData, short_name
from budget.report.blocks import Block, Figure, Heading, Para, Table, Tiles
from budget.report.sections import build

_PREFIX = {"note": "> Note: ", "warning": "> **Warning:** ", "caution": "> *Caution:* ", "summary": ""}


def cell(text: str) -> str:
    """A table cell: pipes escaped, line breaks flattened.

    >>> cell("a|b\\nc")
    'a\\\\|b c'
    """
    return str(text).replace("|", "\\|").replace("\n", " ")


def table(header: tuple[str, ...], rows: tuple[tuple[str, ...], ...], numeric: tuple[bool, ...] = ()) -> str:
    """A pipe table; numeric columns right-aligned."""
    align = [("---:" if i < len(numeric) and numeric[i] else ":---") for i in range(len(header))]
    lines = ["| " + " | ".join(cell(h) or " " for h in header) + " |", "| " + " | ".join(align) + " |"]
    lines += ["| " + " | ".join(cell(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


def render_block(block: Block) -> str:
    if isinstance(block, Heading):
        return f"## {block.text}"
    if isinstance(block, Para):
        return _PREFIX.get(block.kind, "") + block.text
    if isinstance(block, Table):
        return table(block.header, block.rows, block.numeric)
    if isinstance(block, Figure):
        return f"![{block.caption}]({block.name}.svg)\n\n*{block.caption}*"
    if isinstance(block, Tiles):
        return table(("quantity", "value", "meaning"), tuple((a, b, c) for a, b, c, _ in block.items), (False, True, False))
    raise TypeError(f"unknown report block {type(block).__name__}")


def render_markdown(data: ReportData, figures: dict[str, str]) -> str:
    """The whole report; figure ``name`` is expected as ``name.svg`` next to the Markdown file."""
    r = data.result
    head = [
        f"# {data.title}",
        "",
        f"Circuit `{short_name(r.source)}` · error model `{short_name(data.model_source)}` · "
        f"{r.metric} infidelity · engine {r.engine} · target {data.target:g}",
    ]
    body = [render_block(b) for b in build(data, figures)]
    return "\n".join(head) + "\n\n" + "\n\n".join(body) + "\n"
