"""One normal form for the errors of a noisy layer: a list of local error terms.

Each term has a *support* (the qubits it acts on, in gate order: any qubits, not only those of an
operation), a *kind* and a *source* (family, site, operation) for shares and sensitivities. In
the generator picture of small Markovian errors (Blume-Kohout et al., "A taxonomy of small
Markovian errors", PRX Quantum 3, 020335 (2022)) an operation's error channel (design.md §2)
becomes:

- :attr:`TermKind.HAMILTONIAN`: h_P P, the exact generator of the coherent unitary,
  coherent = exp(-i Σ h_P P) (``NoisyOperation.hamiltonian``);
- :attr:`TermKind.STOCHASTIC`: a Pauli channel rate p_P, ρ -> (1 - p) ρ + p P ρ P: the stochastic
  Pauli rates, then the depolarizing channel λ as every non-identity Pauli at λ/d²
  (ρ -> (1-λ)ρ + λ I/d = (1 - λ + λ/d²) ρ + (λ/d²) Σ_{P≠I} P ρ P);
- :attr:`TermKind.RELAXATION`: T1/T2 relaxation of one qubit, the jump operators σ- = |0><1| at
  probability γ and Z at (1 - c)/2 (c the dephasing factor); its Pauli twirl (p_x, p_y, p_z)
  (Tomita & Svore, Phys. Rev. A 90, 062320 (2014)) keeps the process fidelity exact.

A layer's normal form (:func:`layer_errors`) is its sites in channel order: each operation's own
errors (site i belongs to ``layer.operations[i]`` and acts right after its ideal gate), the idle
qubits' relaxation, then the layer's context errors (drive crosstalk, spectator ZZ, pulse bleed
into the next layer, :mod:`budget.errors.context_terms`), whose supports may overlap the
operations' qubits and each other's. Every engine reads a layer's errors only through it: the
ideal gates come from ``layer.operations``, the errors from the sites, one after the other
(:class:`SiteErrors`: the terms of one site grouped by kind, in channel order; ``terms()`` lists
them one by one), with the helpers below (:func:`jump_operators`, :func:`stochastic_rates`,
:func:`stochastic_process`) and, for exact channels, :func:`budget.errors.fidelity.site_kraus`
and the site's exact coherent ``unitary``. A new error mechanism is a new source of sites here
(or a new term kind with its jump operators and twirl), not a change in any engine.

>>> from budget.circuit.ir import Operation
>>> import numpy as np
>>> nop = NoisyOperation(Operation("x", (3,)), "x", np.eye(2), {"X": 0.01}, depolarizing=0.003)
>>> [(t.kind.value, t.qubits, t.label, round(t.value, 6)) for t in operation_errors(nop).terms()][:2]
[('hamiltonian', (3,), 'X', 0.01), ('stochastic', (3,), 'X', 0.00075)]
"""

from __future__ import annotations

import enum
from typing import NamedTuple

import numpy as np

from budget.errors.noisy import IDLE, NoisyLayer, NoisyOperation, Relaxation
from budget.pauli_algebra import pauli_labels, pauli_matrix

_SIGMA_MINUS = np.array([[0, 1], [0, 0]], dtype=complex)
_Z = np.diag([1.0 + 0j, -1.0])
for _m in (_SIGMA_MINUS, _Z):
    _m.setflags(write=False)


class TermKind(enum.Enum):
    HAMILTONIAN = "hamiltonian"
    STOCHASTIC = "stochastic"
    RELAXATION = "relaxation"


class Source(NamedTuple):
    """Where a term comes from: its family (shares), its site (the qubits of the operation or the
    idle qubit, in gate order) and the operation (None for idle relaxation), whose knobs give the
    unit generators for sensitivities (``NoisyOperation.knob_generators``)."""

    family: str
    site: tuple[int, ...]
    operation: NoisyOperation | None = None


class ErrorTerm(NamedTuple):
    """One local error term (see module docstring). A named tuple, not a dataclass: a 1,000-qubit
    circuit has tens of thousands of distinct operations, and their terms are built once per run.

    Attributes:
        kind: the term's kind.
        qubits: its support, gate order.
        source: where it comes from.
        label: Pauli label over ``qubits`` (HAMILTONIAN, STOCHASTIC); ``""`` for RELAXATION.
        value: h_P (HAMILTONIAN, radians) or p_P (STOCHASTIC, probability); 0 for RELAXATION.
        relaxation: the relaxation (RELAXATION only).
    """

    kind: TermKind
    qubits: tuple[int, ...]
    source: Source
    label: str = ""
    value: float = 0.0
    relaxation: Relaxation | None = None

    def jumps(self) -> list[tuple[np.ndarray, float]]:
        """(L on the support, probability) of this term's jump operators (a Pauli for STOCHASTIC)."""
        if self.kind is TermKind.STOCHASTIC:
            return [(pauli_matrix(self.label), self.value)]
        if self.kind is TermKind.RELAXATION:
            return relaxation_jumps(self.relaxation)
        return []

    def twirl(self) -> dict[str, float]:
        """Pauli label over ``qubits`` -> first-order stochastic rate (the term itself for
        STOCHASTIC, the Pauli twirl for RELAXATION, nothing for HAMILTONIAN)."""
        if self.kind is TermKind.STOCHASTIC:
            return {self.label: self.value}
        if self.kind is TermKind.RELAXATION:
            px, py, pz = self.relaxation.pauli_twirl()
            return {"X": px, "Y": py, "Z": pz}
        return {}


def relaxation_jumps(r: Relaxation) -> list[tuple[np.ndarray, float]]:
    """Jump operators of one qubit's relaxation: σ- at γ, Z at (1 - c)/2 (the non-zero ones)."""
    out = []
    if r.gamma > 0:
        out.append((_SIGMA_MINUS, r.gamma))
    if r.dephasing_factor < 1:
        out.append((_Z, (1 - r.dephasing_factor) / 2))
    return out


class SiteErrors(NamedTuple):
    """The terms of one site (an operation, or an idle qubit), grouped by kind in channel order.
    A named tuple of tuples, so that building it costs about what reading the operation does.

    Attributes:
        source: family, site (the support of the site's terms, gate order) and operation.
        hamiltonian: (label over the site, h_P) of the HAMILTONIAN terms.
        stochastic: (label over the site, p_P) of the STOCHASTIC terms: the Pauli rates, then the
            depolarizing channel as every non-identity Pauli at λ/d².
        relaxation: the RELAXATION terms, each on its own qubit.
        unitary: exp(-i Σ h_P P) of the HAMILTONIAN terms up to global phase, exactly as the model
            built it (exact engines apply it without a matrix exponential); None: the identity.
        groups: lengths of the consecutive Pauli channels that ``stochastic`` lists (the Pauli
            rates, then the depolarizing channel), for exact channels; () means one channel.
    """

    source: Source
    hamiltonian: tuple[tuple[str, float], ...]
    stochastic: tuple[tuple[str, float], ...]
    relaxation: tuple[Relaxation, ...]
    unitary: np.ndarray | None = None
    groups: tuple[int, ...] = ()

    @property
    def qubits(self) -> tuple[int, ...]:
        return self.source.site

    def terms(self) -> tuple[ErrorTerm, ...]:
        """The site's terms one by one, each with its support, kind and source."""
        qs, src = self.source.site, self.source
        return (
            *(ErrorTerm(TermKind.HAMILTONIAN, qs, src, lab, h) for lab, h in self.hamiltonian),
            *(ErrorTerm(TermKind.STOCHASTIC, qs, src, lab, p) for lab, p in self.stochastic),
            *(ErrorTerm(TermKind.RELAXATION, (r.qubit,), src, "", 0.0, r) for r in self.relaxation),
        )


def operation_errors(nop: NoisyOperation) -> SiteErrors:
    """The terms of one operation: Hamiltonian, stochastic Pauli rates, depolarizing, relaxation
    of each of its qubits (the order of the channel, noisy.py)."""
    qs = nop.op.qubits
    sto = tuple(nop.pauli_rates.items())
    groups = (len(sto),) if sto else ()
    if nop.depolarizing > 0:
        p = nop.depolarizing / 4 ** len(qs)
        sto += tuple((label, p) for label in pauli_labels(len(qs))[1:])
        groups += (len(sto) - sum(groups),)
    return SiteErrors(Source(nop.family, qs, nop), tuple(nop.hamiltonian.items()), sto, nop.relaxation,
                      nop.coherent, groups)


def layer_errors(layer: NoisyLayer) -> tuple[SiteErrors, ...]:
    """The layer's normal form: its sites in channel order (module docstring). The first
    ``len(layer.operations)`` belong to the operations, in order; then the idle qubits that relax,
    then the context errors."""
    return (*map(operation_errors, layer.operations), *errors_after_gates(layer))


def site_stages(sites: tuple[SiteErrors, ...]) -> tuple[int, ...]:
    """Stage of each site (0, 1, ...; never decreasing): consecutive sites whose Hamiltonian terms
    all commute share a stage, so that one exponential exp(-i Σ_stage h_P P) equals the product of
    their unitaries in channel order. Commuting is tested qubit by qubit (on a qubit that two sites
    share, every term of both carries the same letter), which is enough. A layer's operations
    (disjoint) and idle qubits (no Hamiltonian terms) are always stage 0; a context error that does
    not commute with what came before it opens a new stage. Engines that go beyond first order
    apply the stages one after the other; to first order the stages do not matter.

    >>> from budget.circuit.ir import Operation
    >>> x = NoisyOperation(Operation("x", (0,)), "x", np.eye(2), {"X": 0.01})
    >>> zz = NoisyOperation(Operation("id", (0, 1)), "zz", np.eye(4), {"ZI": 0.1, "IZ": 0.1, "ZZ": -0.1})
    >>> z = NoisyOperation(Operation("id", (1,)), "z", np.eye(2), {"Z": 0.1})
    >>> site_stages(tuple(map(operation_errors, (x, zz, z, x))))
    (0, 1, 1, 2)
    """
    out: list[int] = []
    stage, letters = 0, {}  # qubit -> the one letter the current stage's terms carry there ("" : several)
    for site in sites:
        mine: dict[int, str] = {}
        for label, _ in site.hamiltonian:
            for q, c in zip(site.qubits, label):
                if c != "I":
                    mine[q] = c if mine.get(q, c) == c else ""
        if any(letters.get(q, c) != c or c == "" for q, c in mine.items() if q in letters):
            stage, letters = stage + 1, {}
        for q, c in mine.items():
            letters[q] = c if letters.get(q, c) == c else ""
        out.append(stage)
    return tuple(out)


def errors_after_gates(layer: NoisyLayer) -> tuple[SiteErrors, ...]:
    """The sites of :func:`layer_errors` after the operations' own: idle relaxation, then context."""
    idle = tuple(e for e in map(idle_errors, layer.idle) if e is not None)
    return (*idle, *map(operation_errors, layer.context)) if layer.context else idle


def idle_errors(r: Relaxation) -> SiteErrors | None:
    """The relaxation term of an idle qubit (family ``"idle"``); None when it is trivial."""
    if r.is_trivial:
        return None
    return SiteErrors(Source(IDLE, (r.qubit,)), (), (), (r,))


def _place(label: str, qubits: tuple[int, ...], site: tuple[int, ...]) -> str:
    """A label over ``qubits`` written over the site's qubits (identity elsewhere)."""
    if qubits == site:
        return label
    letters = dict(zip(qubits, label))
    return "".join(letters.get(q, "I") for q in site)


def _embed(m: np.ndarray, qubits: tuple[int, ...], site: tuple[int, ...]) -> np.ndarray:
    """``m`` on ``qubits`` as a matrix on ``site`` (a superset), first qubit most significant."""
    k, j = len(site), len(qubits)
    if qubits == site:
        return m
    pos = [site.index(q) for q in qubits]
    order = pos + [i for i in range(k) if i not in pos]
    inverse = list(np.argsort(order))
    full = np.kron(m, np.eye(2 ** (k - j), dtype=complex)).reshape((2,) * (2 * k))
    return full.transpose(inverse + [k + i for i in inverse]).reshape(2**k, 2**k)


def jump_operators(errors: SiteErrors) -> list[tuple[np.ndarray, float]]:
    """(L on the site's qubits, probability) of every stochastic term (L = P, p > 0) and of every
    relaxation (σ- at γ, Z at (1-c)/2, embedded in the site), in channel order."""
    out = [(pauli_matrix(label), p) for label, p in errors.stochastic if p > 0]
    for r in errors.relaxation:
        out += [(_embed(m, (r.qubit,), errors.qubits), p) for m, p in relaxation_jumps(r)]
    return out


def stochastic_rates(errors: SiteErrors) -> dict[str, float]:
    """Label over the site's qubits -> first-order stochastic rate (stochastic terms plus the
    Pauli twirl of each relaxation), summed in channel order."""
    rates: dict[str, float] = {}
    for label, p in errors.stochastic:
        rates[label] = rates.get(label, 0.0) + p
    for r in errors.relaxation:
        if r.is_trivial:
            continue
        for letter, p in zip("XYZ", r.pauli_twirl()):
            key = _place(letter, (r.qubit,), errors.qubits)
            rates[key] = rates.get(key, 0.0) + p
    return rates


def stochastic_process(errors: SiteErrors) -> float:
    """First-order process infidelity of the stochastic part: Σ p_P over the stochastic terms plus
    p_x + p_y + p_z of each relaxation (its twirl; exact for the process fidelity)."""
    return sum(p for _, p in errors.stochastic) + sum(sum(r.pauli_twirl()) for r in errors.relaxation if not r.is_trivial)


def hamiltonian(errors: SiteErrors) -> dict[str, float]:
    """Pauli label over the site -> h_P of the Hamiltonian terms."""
    return dict(errors.hamiltonian)


def operation_jumps(nop: NoisyOperation) -> list[tuple[np.ndarray, float]]:
    """:func:`jump_operators` of one operation, on its own qubits."""
    return jump_operators(operation_errors(nop))


def operation_stochastic(nop: NoisyOperation) -> float:
    """:func:`stochastic_process` of one operation."""
    return stochastic_process(operation_errors(nop))
