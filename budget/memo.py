"""Cache keys that name an object itself (by identity), never a bare ``id()``.

CPython reuses the address of a freed object, so ``id(x)`` may name a different object once ``x``
is gone; a dict keyed by ``id(x)`` then hands the new object the old one's entry. An
:class:`ObjectKey` holds its object, so while the entry exists the object lives and its identity
cannot pass to another, and it compares with ``is``, so a hit always belongs to the very object
asked about. It can stand alone or inside a tuple key. Identity, not equality, is the point: two
equal-looking layers may carry different source lines, and noisy items hold numpy arrays that do not
compare as booleans.

>>> cache = {}
>>> layer = ["a layer"]  # unhashable, yet usable as a key through ObjectKey
>>> cache[ObjectKey(layer)] = 42
>>> cache.get(ObjectKey(layer)), cache.get(ObjectKey(["a layer"]))
(42, None)
"""

from __future__ import annotations

from typing import Generic, Iterable, TypeVar

T = TypeVar("T")


class ObjectKey(Generic[T]):
    """Wraps an object so that it hashes and compares by identity, and keeps it alive."""

    __slots__ = ("obj",)

    def __init__(self, obj: T) -> None:
        self.obj = obj

    def __hash__(self) -> int:
        return id(self.obj)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, ObjectKey) and other.obj is self.obj

    def __repr__(self) -> str:
        return f"ObjectKey({type(self.obj).__name__})"


def distinct(objects: Iterable[T]) -> list[T]:
    """The objects in first-seen order, each distinct object (by identity) once.

    >>> a, b = [1], [1]
    >>> len(distinct([a, b, a]))
    2
    """
    return list({ObjectKey(obj): obj for obj in objects}.values())
