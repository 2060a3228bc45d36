"""One walk of the circuit tree, for ideal items (:mod:`budget.circuit.ir`) and noisy ones
(:mod:`budget.errors.noisy`) alike.

Every item class names its kind in a class attribute ``kind`` (a :class:`Kind`). Code that walks a
circuit goes through this module, in one of two ways:

- a :class:`Visitor` subclass defines one method per kind it handles (``layer``, ``repeat``,
  ``measure``, ``reset``, ``if_block``); :meth:`Visitor.visit` dispatches on the kind, and a kind
  without a method raises :class:`UnsupportedItem` naming the walker;
- the flattening iterators :func:`counted` (each item that is not a repeat, once per place in the
  text, with the exact number of times it executes) and :func:`unrolled` (items in execution order,
  repeats unrolled: tests and small circuits only) walk repeats and if blocks themselves.

An object without a known ``kind`` is refused everywhere (:func:`kind_of`): a new kind of item can
never fall silently into the branch of another. Repeats are never unrolled except by
:func:`unrolled`; multiplicities are Python ints (a repeat may hold 10**9 iterations).

>>> from budget.circuit.ir import Layer, Operation, Repeat
>>> body = (Layer((Operation("x", (0,)),)), Repeat((Layer(()),), 10**9))
>>> [(kind_of(it).value, n) for it, n in counted(body)]
[('layer', 1), ('layer', 1000000000)]
"""

from __future__ import annotations

import enum
from typing import Any, Iterable, Iterator


class Kind(enum.Enum):
    """The kinds of circuit items; the value is the kind's name in messages."""

    LAYER = "layer"
    REPEAT = "repeat"
    MEASURE = "measurement"
    RESET = "reset"
    IF = "if block"


MID_CIRCUIT = frozenset({Kind.MEASURE, Kind.RESET, Kind.IF})
"""Kinds that only the measurement-aware metrics (detectors, record) support."""

_HANDLER = {Kind.LAYER: "layer", Kind.REPEAT: "repeat", Kind.MEASURE: "measure", Kind.RESET: "reset", Kind.IF: "if_block"}


class UnsupportedItem(TypeError):
    """A walker met an item of a kind it does not handle (or of no known kind at all)."""


def kind_of(item: object, where: str = "circuit walk") -> Kind:
    """The kind of ``item``; an object of no known kind raises :class:`UnsupportedItem`."""
    kind = getattr(type(item), "kind", None)
    if not isinstance(kind, Kind):
        raise UnsupportedItem(f"{where}: {type(item).__name__} is not a circuit item of a known kind")
    return kind


def item_kind(item: object) -> str:
    """A short name of an item's kind, for messages (``"measurement"``, ``"reset"``, ...)."""
    kind = getattr(type(item), "kind", None)
    return kind.value if isinstance(kind, Kind) else type(item).__name__


def unsupported_item(item: object, where: str) -> UnsupportedItem:
    """The error a walker raises for an item kind it does not handle."""
    return UnsupportedItem(f"{where}: circuit item of kind {item_kind(item)} is not supported here")


def branches(item: Any) -> tuple[tuple, ...]:
    """The item sequences nested directly in ``item``: a repeat's body, an if block's two
    branches (ideal ``then``/``orelse``), nothing for a layer, measurement or reset."""
    kind = kind_of(item)
    if kind is Kind.REPEAT:
        return (item.body,)
    if kind is Kind.IF:
        return (item.then, item.orelse)
    return ()


class Visitor:
    """Dispatch on item kinds. Subclasses define a method for each kind they handle; the others
    raise :class:`UnsupportedItem` naming ``where`` (the walker, for messages)."""

    where = "circuit walk"

    def visit(self, item: Any) -> Any:
        return getattr(self, _HANDLER[kind_of(item, self.where)])(item)

    def visit_all(self, items: Iterable[Any], *, reverse: bool = False) -> None:
        """Visit ``items`` in time order (``reverse``: last first)."""
        for it in reversed(tuple(items)) if reverse else items:
            self.visit(it)

    def layer(self, item: Any) -> Any:
        raise unsupported_item(item, self.where)

    def repeat(self, item: Any) -> Any:
        raise unsupported_item(item, self.where)

    def measure(self, item: Any) -> Any:
        raise unsupported_item(item, self.where)

    def reset(self, item: Any) -> Any:
        raise unsupported_item(item, self.where)

    def if_block(self, item: Any) -> Any:
        raise unsupported_item(item, self.where)


def counted(items: Iterable[Any], mult: int = 1, *, where: str = "circuit walk") -> Iterator[tuple[Any, int]]:
    """Each item that is not a repeat, in text order, with the number of times it executes
    (Python int, exact). The items of an if block count as if both branches ran (an upper bound);
    the if block itself is yielded first."""
    for it in items:
        kind = kind_of(it, where)
        if kind is Kind.REPEAT:
            yield from counted(it.body, mult * int(it.count), where=where)
            continue
        yield it, mult
        for inner in branches(it):
            yield from counted(inner, mult, where=where)


def layers(items: Iterable[Any], *, where: str = "circuit walk") -> Iterator[tuple[Any, int]]:
    """:func:`counted` restricted to layers (inside if blocks too)."""
    return ((it, n) for it, n in counted(items, where=where) if it.kind is Kind.LAYER)


def first_mid_circuit(items: Iterable[Any]) -> Any | None:
    """The first measurement, reset or if block in program order (at any depth), or None."""
    for it in items:
        kind = kind_of(it)
        if kind in MID_CIRCUIT:
            return it
        if kind is Kind.REPEAT:
            found = first_mid_circuit(it.body)
            if found is not None:
                return found
    return None


def unrolled(items: Iterable[Any], *, where: str = "unrolled walk") -> Iterator[Any]:
    """Every item that is not a repeat, in execution order with repeats unrolled (tests and small
    circuits only). If blocks are yielded whole: which branch runs is not known here."""
    for it in items:
        if kind_of(it, where) is Kind.REPEAT:
            for _ in range(int(it.count)):
                yield from unrolled(it.body, where=where)
        else:
            yield it


def gate_kind(item: object, where: str) -> Kind:
    """The kind of ``item`` for walkers of gate-only circuits: :attr:`Kind.LAYER` or
    :attr:`Kind.REPEAT`; any other kind raises :class:`UnsupportedItem` naming ``where``."""
    kind = kind_of(item, where)
    if kind is not Kind.LAYER and kind is not Kind.REPEAT:
        raise unsupported_item(item, where)
    return kind
