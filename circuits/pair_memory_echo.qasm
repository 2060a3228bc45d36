// The same memory with an echo, North Fen Cryogenics Lab demo (invented).
// x pulses on q[1], q[0], q[1], q[0] between four equal idle spans: the spans see the frames
// I, X1, X0X1, X0, so the ZZ term and both single-qubit Z terms of the coupling change sign
// twice each and cancel (all are diagonal and commute, so exactly). Barriers keep each pulse in its
// own layer. Model: circuits/fen_pair_zz.toml.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[2];
id q[0];
barrier q;
x q[1];
barrier q;
id q[0];
barrier q;
x q[0];
barrier q;
id q[0];
barrier q;
x q[1];
barrier q;
id q[0];
barrier q;
x q[0];
barrier q;
