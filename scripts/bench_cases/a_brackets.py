"""Case a, by hand in SymPy: ad_X^4 Y and [Z, [Y, [X, [Y, Z]]]].

Lie bracket [A, B] = DB*A - DA*B (Jacobians with diff), expanded after
every bracket. Prints each field on one line as `[c1, c2, c3, c4]`.
"""
import sys
import time

import sympy as sp

t0 = time.perf_counter()
w, x, y, z = sp.symbols("w x y z")
coords = sp.Matrix([w, x, y, z])
R = sp.Rational

X = sp.Matrix([x*y*z - w**2*y, w*z**2 + 2*x**3 - y, x*y**2*w - z, w*x*y + R(1, 2)*z**3])
Y = sp.Matrix([y**3 - z*w, x*w**2 + z**2*y, w*x*z - x**2, 3*x - y*w**2*z])
Z = sp.Matrix([w*x - R(2, 3)*y**2*z**2, z - x*y**2, w**3 + y, x*z - R(5, 4)*w**2*x**2])


def bracket(A, B):
    return (B.jacobian(coords) * A - A.jacobian(coords) * B).applyfunc(sp.expand)


def show(F):
    print("[%s]" % ", ".join(str(c) for c in F), flush=True)


adX = Y
for _ in range(4):
    adX = bracket(X, adX)
show(adX)

show(bracket(Z, bracket(Y, bracket(X, bracket(Y, Z)))))
print("sympy-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
