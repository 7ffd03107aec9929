"""Case a, by hand in SymEngine: ad_X^4 Y and [Z, [Y, [X, [Y, Z]]]].

Lie bracket [A, B] = DB*A - DA*B (`Matrix.jacobian`), expanded after
every bracket. Prints each field on one line as `[c1, c2, c3, c4]`.
"""
import sys
import time

import symengine as se

from se_tools import bracket, field_text

t0 = time.perf_counter()
w, x, y, z = se.symbols("w x y z")
coords = se.Matrix([w, x, y, z])
R = se.Rational

X = se.Matrix([x*y*z - w**2*y, w*z**2 + 2*x**3 - y, x*y**2*w - z, w*x*y + R(1, 2)*z**3])
Y = se.Matrix([y**3 - z*w, x*w**2 + z**2*y, w*x*z - x**2, 3*x - y*w**2*z])
Z = se.Matrix([w*x - R(2, 3)*y**2*z**2, z - x*y**2, w**3 + y, x*z - R(5, 4)*w**2*x**2])

adX = Y
for _ in range(4):
    adX = bracket(X, adX, coords)
print(field_text(adX), flush=True)

nested = bracket(Z, bracket(Y, bracket(X, bracket(Y, Z, coords), coords), coords), coords)
print(field_text(nested), flush=True)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
