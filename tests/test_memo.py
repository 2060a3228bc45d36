"""Caches keyed by objects (budget/memo.py): a recycled id() never returns a stale entry.

CPython gives a freed object's address to the next object of the same size, so a cache keyed by a
bare ``id(x)`` that does not keep ``x`` alive answers a new object with an old entry (common
practice, no source: CPython's small-object allocator reuses freed blocks first). The first test
shows that this happens on this interpreter, so the others, which walk fresh objects through real
caches, would catch a bare ``id()`` key.
"""

from __future__ import annotations

import gc
import re
from pathlib import Path

import numpy as np

from budget.circuit.ir import Operation
from budget.engines.generators.dense import DensePropagator
from budget.engines.matrices.channels import content_cache
from budget.errors.noisy import NoisyLayer, NoisyOperation, NoisyRepeat
from budget.memo import ObjectKey, distinct
from budget.pauli_algebra import X, pauli_unitary

ROOT = Path(__file__).resolve().parent.parent


def _repeat(h: float) -> NoisyRepeat:
    """x on one qubit with the coherent error exp(-i h X), repeated 3 times; the body tuple is fresh."""
    nop = NoisyOperation(Operation("x", (0,)), "x", pauli_unitary({"X": h}), {"X": h})
    return NoisyRepeat((NoisyLayer((nop,), (), 0.0),), 3)


def test_bare_ids_are_recycled_on_this_interpreter():
    """Successive fresh repeat bodies, each freed before the next, share addresses: a cache keyed by
    id(body) that did not hold the body would serve the first body's block to a later one."""
    ids = []
    for i in range(50):
        rep = _repeat(1e-3 * (i + 1))
        ids.append(id(rep.body))
        del rep
        gc.collect()
    assert len(set(ids)) < len(ids)


def test_dense_repeat_cache_never_serves_a_recycled_body():
    """The generators engine caches each repeat body's block (engines/generators/dense.py). Fresh
    bodies with growing errors, each dropped after use, always get their own block: the error X
    commutes with the ideal x gate, so the body's pushed Hamiltonian is h X (hand derivation)."""
    prop = DensePropagator(1, content_cache(1))
    for i in range(50):
        h = 1e-3 * (i + 1)
        rep = _repeat(h)
        inner, _ = prop.repeat(rep)
        assert np.allclose(inner.total(), h * X, atol=1e-15), f"body {i} got a stale block"
        del rep, inner
        gc.collect()


def test_object_key_is_identity_and_holds_its_object():
    a, b = [1.0], [1.0]  # equal, unhashable
    cache = {ObjectKey(a): "a"}
    assert cache.get(ObjectKey(a)) == "a" and cache.get(ObjectKey(b)) is None
    assert ObjectKey(None) == ObjectKey(None) and {ObjectKey(a), ObjectKey(a)} == {ObjectKey(a)}
    key = next(iter(cache))
    del a
    gc.collect()
    assert key.obj == [1.0]  # the cache keeps the object, so its id cannot pass to another
    assert distinct([b, key.obj, b]) == [b, key.obj]


def test_no_cache_in_the_core_is_keyed_by_a_bare_id():
    """Every id() in budget/ is either ObjectKey's hash or an identity __hash__; files another change
    owns are listed with the reason they are safe today (their caches store the key object)."""
    allowed = {
        "budget/memo.py",  # ObjectKey.__hash__
        "budget/errors/noisy.py",  # __hash__ = id(self): identity hashing of the noisy items
        "budget/engines/frame/terms.py",  # caches keep their layers and operations alive (_alive, info)
        "budget/engines/matrices/channels.py",  # content_cache stores (layer, content)
    }
    found = set()
    for path in (ROOT / "budget").rglob("*.py"):
        text = "\n".join(line.split("#", 1)[0] for line in path.read_text().splitlines())
        text = re.sub(r'"""(.|\n)*?"""', "", text)
        if re.search(r"(?<![\w.])id\(", text):
            found.add(path.relative_to(ROOT).as_posix())
    assert found <= allowed, sorted(found - allowed)
