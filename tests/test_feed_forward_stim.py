"""Feed-forward on the stabilizer path (stim) against the exact engine with branches (issue 13).

The exact engine (density matrix with classical branches) is itself checked against cirq's
DensityMatrixSimulator in tests/test_measured_exact.py; here it is the reference for the record
distribution that stim's circuit (written by ``to_stim``) must reproduce: every record stim samples
must have positive exact probability, and the frequencies of records above 1 % must agree within
sampling error (binomial, 5 standard deviations). Refusals: one line naming the line, the condition and the rule.
"""

from __future__ import annotations

import numpy as np
import pytest

from budget.analysis.detectors import infer_checks
from budget.circuit.qasm import parse_qasm
from budget.engines.clifford.stim_circuit import record_qubits, to_stim
from budget.engines.exact.branches import Plan, condition_bits, simulate
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.problems import InputError

HEAD = 'OPENQASM 3;\ninclude "stdgates.inc";\n'

# the if reads the bit the previous iteration wrote (the first iteration reads 0)
PREVIOUS_ITERATION = HEAD + """qubit[2] q;
bit[1] c;
for int i in [0:9] {
  if (c[0]) { x q[1]; }
  h q[0];
  cx q[0], q[1];
  c[0] = measure q[1];
  h q[0];
}
"""

# the if reads a bit written before the block and never rewritten: the look-back grows
GROWING = HEAD + """qubit[2] q;
bit[2] c;
h q[0];
c[1] = measure q[0];
for int i in [0:2] {
  if (c[1]) { x q[1]; }
  c[0] = measure q[1];
  for int j in [0:3] { if (c[0]) { rx(pi) q[0]; } h q[1]; c[0] = measure q[1]; }
}
"""

# gates whose product is a Pauli, under if and else
PAULI_LIKE = HEAD + """qubit[3] q;
bit[2] c;
h q[0];
c[0] = measure q[0];
if (c[0]) { rx(pi) q[1]; p(pi) q[2]; } else { u3(pi, 0, pi) q[2]; }
h q[2];
c[1] = measure q[1];
"""

OPENQASM2_REGISTER = """OPENQASM 2.0;
include "qelib1.inc";
qreg q[2];
creg c[2];
h q[0];
measure q[0] -> c[0];
if(c==1) x q[1];
if(c==2) x q[0];
measure q[1] -> c[1];
"""


def _exact_record(noisy) -> dict[int, float]:
    m = len(record_qubits(noisy))
    return simulate(noisy, Plan((), (), True, tuple(condition_bits(noisy.body)), m)).record


@pytest.mark.parametrize("text", [PREVIOUS_ITERATION, GROWING, PAULI_LIKE, OPENQASM2_REGISTER],
                         ids=["previous-iteration", "growing-lookback", "pauli-like", "register"])
def test_stim_record_matches_the_exact_engine(text):
    noisy = attach(parse_qasm(text, source="ff.qasm"), ErrorModel.from_dict({}))
    exact = _exact_record(noisy)
    shots = 4000
    sample = to_stim(noisy).compile_sampler(seed=7).sample(shots)
    keys = sample.astype(np.int64) @ (1 << np.arange(sample.shape[1], dtype=np.int64))
    seen, counts = np.unique(keys, return_counts=True)
    for k, c in zip(seen, counts):
        p = exact.get(int(k), 0.0)
        assert p > 1e-9, (int(k), exact)
        if p > 0.01:  # frequent records: binomial error (rare ones: support only)
            assert abs(c / shots - p) < 5 * np.sqrt(p * (1 - p) / shots)
    # and detectors inferred from stim's circuit are deterministic in the exact engine
    checks = infer_checks(noisy)
    for d in checks.detectors:
        mask = sum(1 << i for i in d.measurements)
        odd = sum(p for r, p in exact.items() if bin(r & mask).count("1") % 2 != d.ideal)
        assert odd < 1e-9


def test_previous_iteration_block_stays_folded():
    noisy = attach(parse_qasm(PREVIOUS_ITERATION), ErrorModel.from_dict({}))
    text = str(to_stim(noisy))
    assert "REPEAT 9 {" in text and "CX rec[-1] 1" in text


@pytest.mark.parametrize("body, words", [
    ("h q[0];\nc[0] = measure q[0];\nh q[1];\nc[1] = measure q[1];\nif (c == 3) { x q[0]; }\n",
     ["ff.qasm:", "2 recorded bits", "c[0], c[1]", "one recorded bit"]),
    ("h q[0];\nc[0] = measure q[0];\nif (c[0]) { h q[1]; }\n", ["ff.qasm:", "gate h", "not a Pauli"]),
])
def test_refusals_name_the_line_and_the_rule(body, words):
    noisy = attach(parse_qasm(HEAD + "qubit[2] q;\nbit[2] c;\n" + body, source="ff.qasm"), ErrorModel.from_dict({}))
    with pytest.raises(InputError) as info:
        to_stim(noisy)
    message = str(info.value)
    assert "\n" not in message and all(w in message for w in words), message
