// Four Trotter steps of a 4-site hopping (XX+YY) chain, North Fen Cryogenics Lab demo (invented).
// One step applies exp(-i theta (XX+YY)/2) on bonds (0,1), (2,3), then (1,2).
// The step is written with CZ, H and SX only, the device's native set; the loop is kept folded.
OPENQASM 3.0;
include "stdgates.inc";

// exp(-i theta ZZ/2) from two CZ (CX = H CZ H on the target)
gate zz_cz(theta) a, b {
  h b; cz a, b; h b;
  rz(theta) b;
  h b; cz a, b; h b;
}

// exp(-i theta (XX+YY)/2): XX in the H frame, YY in the SX frame
gate hop(theta) a, b {
  h a; h b; zz_cz(theta) a, b; h a; h b;
  sxdg a; sxdg b; zz_cz(theta) a, b; sx a; sx b;
}

qubit[4] q;
bit[4] c;

x q[0];
x q[2];
for int step in [0:3] {
  hop(0.1) q[0], q[1];
  hop(0.1) q[2], q[3];
  hop(0.1) q[1], q[2];
}
c = measure q;
