#!/usr/bin/python3
"""Reference values of Wigner 3j / 6j symbols and Clebsch-Gordan coefficients from SymPy
(sympy.physics.wigner, exact rational arithmetic), for tests/models/angular/wigner_test.cpp.

Input on stdin, one request per line, every angular momentum doubled (2j, 2m) as integers:
    3j  2j1 2j2 2j3 2m1 2m2 2m3
    6j  2j1 2j2 2j3 2j4 2j5 2j6
    cg  2j1 2m1 2j2 2m2 2J 2M        (<j1 m1; j2 m2 | J M>)
Output: one line per request, the value to 25 significant digits.
Run with Debian's /usr/bin/python3 (python3-sympy)."""
import sys

from sympy import Rational, N
from sympy.physics.wigner import clebsch_gordan, wigner_3j, wigner_6j


def half(s):
    return Rational(int(s), 2)


def main():
    out = []
    for line in sys.stdin:
        f = line.split()
        if not f:
            continue
        kind, args = f[0], [half(x) for x in f[1:]]
        if kind == "3j":
            v = wigner_3j(*args)
        elif kind == "6j":
            v = wigner_6j(*args)
        elif kind == "cg":
            j1, m1, j2, m2, j, m = args
            v = clebsch_gordan(j1, j2, j, m1, m2, m)  # SymPy's argument order
        else:
            raise SystemExit("unknown request " + kind)
        out.append(str(N(v, 25)))
    sys.stdout.write("\n".join(out) + "\n")


if __name__ == "__main__":
    main()
