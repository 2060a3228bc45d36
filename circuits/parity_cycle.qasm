// One parity-check cycle on a 5-qubit line: data q[0], q[2], q[4]; checks on q[1], q[3].
// North Fen Cryogenics Lab demo (invented). Run with --cycles N to repeat the cycle N times.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[5];
creg c[5];
h q[1];
h q[3];
cz q[0], q[1];
cz q[2], q[3];
cz q[2], q[1];
cz q[4], q[3];
h q[1];
h q[3];
barrier q;
measure q -> c;
