"""The plain blocks a report is made of, so HTML and Markdown show exactly the same content:
:class:`Heading`, :class:`Para`, :class:`Table`, :class:`Figure`, :class:`Tiles`. The renderers
(:mod:`budget.report.html`, :mod:`budget.report.markdown`) only decide how a block looks.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Union


@dataclass(frozen=True)
class Heading:
    text: str
    anchor: str


@dataclass(frozen=True)
class Para:
    text: str
    kind: str = "text"  # "text", "summary", "note", "warning", "caution"


@dataclass(frozen=True)
class Table:
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    numeric: tuple[bool, ...] = ()  # right-align these columns


@dataclass(frozen=True)
class Figure:
    name: str  # file stem, e.g. "depth-curves"
    svg: str
    caption: str


@dataclass(frozen=True)
class Tiles:
    """The headline numbers: (label, value, explanation, tone) with tone "good", "bad" or ""."""

    items: tuple[tuple[str, str, str, str], ...]


Block = Union[Heading, Para, Table, Figure, Tiles]
