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

Engines that work with first-order generators (generators, clifford, pauli) read an operation's
or an idle qubit's errors only through :func:`operation_terms`, :func:`idle_terms` and the helpers
below (:func:`jump_operators`, :func:`stochastic_rates`, :func:`stochastic_process`). A new error
mechanism is a new source of terms here (or a new term kind with its jump operators and twirl),
not a change in every engine. The exact engine uses the exact channel of the same operation
(:func:`budget.errors.fidelity.error_channel_kraus`).

>>> from budget.circuit.ir import Operation
>>> import numpy as np
>>> nop = NoisyOperation(Operation("x", (3,)), "x", np.eye(2), {"X": 0.01}, depolarizing=0.003)
>>> [(t.kind.value, t.qubits, t.label, round(t.value, 6)) for t in operation_terms(nop)][:2]
[('hamiltonian', (3,), 'X', 0.01), ('stochastic', (3,), 'X', 0.00075)]
"""

from __future__ import annotations

import enum
from dataclasses import dataclass

import numpy as np

from budget.errors.noisy import IDLE, NoisyOperation, Relaxation
from budget.pauli_algebra import pauli_labels, pauli_matrix

_SIGMA_MINUS = np.array([[0, 1], [0, 0]], dtype=complex)
_Z = np.diag([1.0 + 0j, -1.0])
for _m in (_SIGMA_MINUS, _Z):
    _m.setflags(write=False)


class TermKind(enum.Enum):
    HAMILTONIAN = "hamiltonian"
    STOCHASTIC = "stochastic"
    RELAXATION = "relaxation"


@dataclass(frozen=True)
class Source:
    """Where a term comes from: its family (shares), its site (the qubits of the operation or the
    idle qubit, in gate order) and the operation (None for idle relaxation), whose knobs give the
    unit generators for sensitivities (``NoisyOperation.knob_generators``)."""

    family: str
    site: tuple[int, ...]
    operation: NoisyOperation | None = None


@dataclass(frozen=True)
class ErrorTerm:
    """One local error term (see module docstring).

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


def operation_terms(nop: NoisyOperation) -> tuple[ErrorTerm, ...]:
    """The terms of one operation, in the order Hamiltonian, stochastic Pauli rates,
    depolarizing, relaxation of each of its qubits (the order of the channel, noisy.py)."""
    src = Source(nop.family, nop.qubits, nop)
    k = len(nop.qubits)
    out = [ErrorTerm(TermKind.HAMILTONIAN, nop.qubits, src, label, h) for label, h in nop.hamiltonian.items()]
    out += [ErrorTerm(TermKind.STOCHASTIC, nop.qubits, src, label, p) for label, p in nop.pauli_rates.items()]
    if nop.depolarizing > 0:
        out += [ErrorTerm(TermKind.STOCHASTIC, nop.qubits, src, label, nop.depolarizing / 4**k) for label in pauli_labels(k)[1:]]
    out += [ErrorTerm(TermKind.RELAXATION, (r.qubit,), src, relaxation=r) for r in nop.relaxation]
    return tuple(out)


def idle_terms(r: Relaxation) -> tuple[ErrorTerm, ...]:
    """The term of an idle qubit's relaxation (family ``"idle"``); none when it is trivial."""
    if r.is_trivial:
        return ()
    return (ErrorTerm(TermKind.RELAXATION, (r.qubit,), Source(IDLE, (r.qubit,)), relaxation=r),)


def _place(label: str, qubits: tuple[int, ...], site: tuple[int, ...]) -> str:
    """A label over ``qubits`` written over the site's qubits (identity elsewhere)."""
    if qubits == site:
        return label
    letters = dict(zip(qubits, label))
    return "".join(letters.get(q, "I") for q in site)


def jump_operators(terms: tuple[ErrorTerm, ...], site: tuple[int, ...]) -> list[tuple[np.ndarray, float]]:
    """(L on the site's qubits, probability) of every stochastic and relaxation term, in order.
    Terms of a sub-support are embedded in the site (first qubit most significant)."""
    out = []
    for t in terms:
        for m, p in t.jumps():
            if t.kind is TermKind.STOCHASTIC and t.value <= 0:
                continue
            if t.qubits != site:
                m = _embed(m, t.qubits, site)
            out.append((m, p))
    return out


def _embed(m: np.ndarray, qubits: tuple[int, ...], site: tuple[int, ...]) -> np.ndarray:
    """``m`` on ``qubits`` as a matrix on ``site`` (a superset), first qubit most significant."""
    k, j = len(site), len(qubits)
    pos = [site.index(q) for q in qubits]
    rest = [i for i in range(k) if i not in pos]
    full = np.kron(m, np.eye(2 ** (k - j), dtype=complex)).reshape((2,) * (2 * k))
    order = pos + rest
    inverse = np.argsort(order)
    full = full.transpose(list(inverse) + [k + i for i in inverse])
    return full.reshape(2**k, 2**k)


def stochastic_rates(terms: tuple[ErrorTerm, ...], site: tuple[int, ...]) -> dict[str, float]:
    """Label over the site's qubits -> first-order stochastic rate (stochastic terms plus the
    Pauli twirl of relaxation), summed in the order of the terms."""
    rates: dict[str, float] = {}
    for t in terms:
        for label, p in t.twirl().items():
            key = _place(label, t.qubits, site)
            rates[key] = rates.get(key, 0.0) + p
    return rates


def stochastic_process(terms: tuple[ErrorTerm, ...]) -> float:
    """First-order process infidelity of the stochastic part: Σ p_P over stochastic terms plus
    p_x + p_y + p_z of each relaxation (its twirl; exact for the process fidelity)."""
    return sum(sum(t.twirl().values()) for t in terms)


def operation_jumps(nop: NoisyOperation) -> list[tuple[np.ndarray, float]]:
    """:func:`jump_operators` of one operation's terms, on its own qubits."""
    return jump_operators(operation_terms(nop), nop.qubits)


def operation_stochastic(nop: NoisyOperation) -> float:
    """:func:`stochastic_process` of one operation's terms."""
    return stochastic_process(operation_terms(nop))


def hamiltonian(terms: tuple[ErrorTerm, ...]) -> dict[str, float]:
    """Pauli label -> h_P of the Hamiltonian terms (all on one support)."""
    out: dict[str, float] = {}
    for t in terms:
        if t.kind is TermKind.HAMILTONIAN:
            out[t.label] = out.get(t.label, 0.0) + t.value
    return out
