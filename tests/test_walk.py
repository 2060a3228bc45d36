"""One walk of the circuit tree (budget/circuit/walk.py): explicit item kinds, and an item of an
unknown kind refused by every engine, the naive product and the tree walkers, never treated as a
repeat."""

from __future__ import annotations

import dataclasses
import random

import pytest

from budget.circuit.ir import IfBlock, Layer, Measure, Operation, Repeat, Reset, StructuredCircuit
from budget.circuit.walk import Kind, UnsupportedItem, counted, kind_of, unrolled
from budget.engines import ENGINE_NAMES, get_engine
from budget.errors.attach import attach
from budget.errors.fidelity import naive_infidelity
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyCircuit, NoisyRepeat, map_items

MODEL = ErrorModel.from_dict({
    "qubits": {"t1_us": 80.0, "t2_us": 60.0},
    "gates": {"sx": {"overrotation": 0.02, "avg_infidelity": 1e-3, "duration_ns": 35.0},
              "cz": {"cphase": 0.03, "duration_ns": 60.0}},
})


@dataclasses.dataclass(frozen=True)
class Pulse:
    """A stand-in for a future item kind (say, a timed pulse block). It has a ``body`` and a
    ``count`` like a repeat, so a walker that treated "not a layer" as a repeat would take it
    silently; it names no kind."""

    body: tuple
    count: int = 2


def _circuit() -> StructuredCircuit:
    sx = Layer((Operation("sx", (0,)), Operation("sx", (1,))))
    cz = Layer((Operation("cz", (0, 1)),))
    return StructuredCircuit(("q[0]", "q[1]"), (sx, Repeat((cz, sx), 3)))


def _with_stranger(noisy: NoisyCircuit, where: str) -> NoisyCircuit:
    """The noisy circuit with a Pulse at the top level or inside the repeat's body."""
    layer, rep = noisy.body
    stranger = Pulse(rep.body)
    if where == "top":
        return dataclasses.replace(noisy, body=(layer, stranger, rep))
    return dataclasses.replace(noisy, body=(layer, NoisyRepeat((*rep.body, stranger), rep.count)))


@pytest.mark.parametrize("where", ["top", "nested"])
@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("name", ENGINE_NAMES)
def test_every_engine_refuses_an_unknown_item_kind(name, metric, where):
    noisy = _with_stranger(attach(_circuit(), MODEL), where)
    engine = get_engine(name)
    with pytest.raises(UnsupportedItem, match="Pulse"):
        if engine.fits(noisy, metric) is None:
            engine.run(noisy, metric)


@pytest.mark.parametrize("where", ["top", "nested"])
def test_naive_product_and_tree_walkers_refuse_an_unknown_item_kind(where):
    noisy = _with_stranger(attach(_circuit(), MODEL), where)
    for walk in (naive_infidelity, NoisyCircuit.distinct_layers, NoisyCircuit.multiplicities,
                 lambda c: list(c.iter_layers()), lambda c: map_items(c.body, lambda layer: layer)):
        with pytest.raises(UnsupportedItem, match="Pulse"):
            walk(noisy)
    ideal = _circuit()
    bad = dataclasses.replace(ideal, body=(*ideal.body, Pulse(ideal.body)))
    for walk in (StructuredCircuit.executed_counts, StructuredCircuit.distinct_operations,
                 lambda c: list(c.iter_layers()), lambda c: attach(c, MODEL)):
        with pytest.raises(UnsupportedItem, match="Pulse"):
            walk(bad)


def test_the_naive_product_is_the_same_with_the_unknown_item_removed():
    """Control for the refusals above: the same circuit without the stranger runs everywhere."""
    noisy = attach(_circuit(), MODEL)
    assert 0 < naive_infidelity(noisy) < 1
    for name in ENGINE_NAMES:
        engine = get_engine(name)
        if engine.fits(noisy, "process") is None:
            assert 0 < engine.run(noisy, "process").infidelity < 1


def test_every_item_class_names_its_kind():
    noisy_kinds = {kind_of(it) for it in attach(_circuit(), MODEL).body}
    assert noisy_kinds == {Kind.LAYER, Kind.REPEAT}
    ideal = [Layer(()), Repeat((Layer(()),), 2), Measure((0,), ("c[0]",)), Reset((0,)), IfBlock(("c[0]",), 1, ())]
    assert [kind_of(it) for it in ideal] == [Kind.LAYER, Kind.REPEAT, Kind.MEASURE, Kind.RESET, Kind.IF]


def _random_body(rng: random.Random, depth: int) -> tuple:
    items = []
    for _ in range(rng.randint(1, 3)):
        roll = rng.random()
        if roll < 0.5 or depth == 0:
            items.append(Layer((Operation("x", (rng.randrange(3),)),)))
        elif roll < 0.8:
            items.append(Repeat(_random_body(rng, depth - 1), rng.randint(1, 4)))
        else:
            items.append(Measure((rng.randrange(3),), ("c[0]",)))
    return tuple(items)


def test_counted_multiplicities_equal_unrolling():
    """Folded multiplicities (counted) against brute-force unrolling, 40 seeded random trees."""
    rng = random.Random(11)
    for _ in range(40):
        body = _random_body(rng, 3)
        by_unrolling: dict[int, int] = {}
        for it in unrolled(body):
            by_unrolling[id(it)] = by_unrolling.get(id(it), 0) + 1
        by_count: dict[int, int] = {}
        for it, n in counted(body):
            by_count[id(it)] = by_count.get(id(it), 0) + n
        assert by_count == by_unrolling
