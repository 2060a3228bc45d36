"""Tables that stay readable in a narrow terminal.

A rich table wider than the terminal is squeezed column by column until every cell wraps or is
cut ("overro…", "0.0018…"): the numbers a user came for are lost. :class:`FitWidth` measures the
table at render time; when its natural width exceeds the space, it prints one block per row
instead (the first cell in bold, then "column: value" pairs that wrap as ordinary text), so every
number stays whole at any width. Wide terminals see the table unchanged.

    >>> from rich.console import Console
    >>> t = Table(title="t")
    >>> for name in ("knob", "tolerance (rad)", "status"):
    ...     t.add_column(name)
    >>> t.add_row("sx.overrotation", "0.0011347", "tighten")
    >>> console = Console(width=30)
    >>> with console.capture() as out:
    ...     console.print(FitWidth(t))
    >>> [line.rstrip() for line in out.get().splitlines()]
    ['t', 'sx.overrotation  tolerance', '(rad): 0.0011347 · status:', 'tighten']
"""

from __future__ import annotations

from rich.console import Console, ConsoleOptions, RenderResult
from rich.measure import Measurement
from rich.table import Table
from rich.text import Text

_UNBOUNDED = 100_000  # characters: wide enough that no table is squeezed while it is measured


def _plain(cell: object) -> Text:
    """A cell as one line of text (styles kept; a header's line breaks become spaces)."""
    text = cell.copy() if isinstance(cell, Text) else Text(str(cell))
    text.plain = " ".join(text.plain.split())
    return text


class FitWidth:
    """``table`` as it is when it fits the terminal, else one wrapped block per row (see module)."""

    def __init__(self, table: Table) -> None:
        self.table = table

    def natural_width(self, console: Console, options: ConsoleOptions) -> int:
        """Width the table takes when no cell wraps (a header may wrap at its spaces)."""
        t = self.table
        shadow = Table(box=t.box, padding=t.padding, show_edge=t.show_edge, pad_edge=t.pad_edge,
                       collapse_padding=t.collapse_padding, show_header=t.show_header)
        for column in t.columns:
            shadow.add_column("\n".join(_plain(column.header).plain.split()))
        for row in range(t.row_count):
            shadow.add_row(*(column._cells[row] for column in t.columns))
        return Measurement.get(console, options.update_width(_UNBOUNDED), shadow).maximum

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        if self.natural_width(console, options) <= options.max_width:
            yield self.table
            return
        if self.table.title:
            yield Text(" ".join(str(self.table.title).split()), style="table.title")
        columns = self.table.columns
        for row in range(self.table.row_count):
            cells = [_plain(c._cells[row]) for c in columns]
            line = cells[0]
            line.stylize("bold")
            sep = "  "
            for column, cell in zip(columns[1:], cells[1:]):
                header = _plain(column.header).plain
                if cell.plain in ("", "—"):  # nothing to say: skipped, as an empty cell
                    continue
                line.append(sep)
                sep = " · "
                line.append(f"{header}: " if header else "", style="dim")
                line.append_text(cell)
            yield line
        if self.table.caption:
            yield Text(" ".join(str(self.table.caption).split()), style="dim")
