"""Case b, by hand in SymPy: x(t) to order 6 for x' = V(t, x), x(0) = x.

Regular perturbation: with V replaced by eps*V, x(t) = x + sum eps^k x_k(t),
and x_k(t) = integral from 0 to t of the eps^(k-1) coefficient of
V(s, x(s)); the k-th term of the chronological expansion is x_k(t).
Prints `order k  [x_k, y_k]`.
"""
import sys
import time

import sympy as sp

t0 = time.perf_counter()
t, s, eps = sp.symbols("t s eps")
x, y = sp.symbols("x y")
N = 6


def V(tt, X):
    xx, yy = X
    return [yy * sp.cos(tt) - xx**2, xx * sp.sin(tt)]


sol = [[x], [y]]  # sol[i][k]: the eps^k coefficient of coordinate i
for k in range(1, N + 1):
    approx = [sum(sol[i][j] * eps**j for j in range(k)) for i in range(2)]
    rhs = V(t, approx)
    new = []
    for i in range(2):
        ck = sp.expand(rhs[i]).coeff(eps, k - 1)
        new.append(sp.expand(sp.integrate(ck.subs(t, s), (s, 0, t))))
    for i in range(2):
        sol[i].append(new[i])
    print("order %d  [%s]" % (k, ", ".join(str(sol[i][k]) for i in range(2))), flush=True)
print("sympy-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
