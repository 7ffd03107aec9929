"""Case b, by hand in SymEngine: x(t) to order 6 for x' = V(t, x), x(0) = x.

Regular perturbation: with V replaced by eps*V, x(t) = x + sum eps^k x_k(t),
and x_k(t) = integral from 0 to t of the eps^(k-1) coefficient of
V(s, x(s)) (time in exponential form, see se_tools). Prints
`order k  [x_k, y_k]`.
"""
import sys
import time

import symengine as se

from se_tools import cos_t, field_text, integral_from_zero, sin_t

t0 = time.perf_counter()
eps = se.Symbol("eps")
x, y = se.symbols("x y")
N = 6


def V(X):
    xx, yy = X
    return [yy * cos_t(1) - xx**2, xx * sin_t(1)]


sol = [[x], [y]]  # sol[i][k]: the eps^k coefficient of coordinate i
for k in range(1, N + 1):
    approx = [sum((sol[i][j] * eps**j for j in range(k)), se.Integer(0)) for i in range(2)]
    rhs = V(approx)
    new = [integral_from_zero(se.expand(rhs[i]).coeff(eps, k - 1)) for i in range(2)]
    for i in range(2):
        sol[i].append(new[i])
    print("order %d  %s" % (k, field_text([sol[i][k] for i in range(2)])), flush=True)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
