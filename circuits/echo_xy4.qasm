// XY4 echo on one qubit: X Y X Y, North Fen Cryogenics Lab demo (invented).
// Repeat with --cycles N: over-rotation errors of X and Y partly cancel.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[1];
creg c[1];
x q[0];
y q[0];
x q[0];
y q[0];
measure q[0] -> c[0];
