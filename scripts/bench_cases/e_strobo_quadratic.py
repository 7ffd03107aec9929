"""Case e, by hand in SymPy: stroboscopic averaged field to order 6.

The generator W(t) = sum eps^k W_k(t) of the time-t flow solves
W' = V + 1/2 [W, V] + 1/12 [W, [W, V]] - 1/720 ad_W^4 V + ...
(coefficients of x/(1 - exp(-x)), [A, B] = DB*A - DA*B), W(0) = 0; it is
built order by order with `integrate` from 0 to t, and the averaged field
is F_k = W_k(T)/T with T = 2*pi. Prints `order k  [F_k]`.
"""
import sys
import time

import sympy as sp

t0 = time.perf_counter()
t, s = sp.symbols("t s")
x, y, z = sp.symbols("x y z")
coords = sp.Matrix([x, y, z])
N = 6
T = 2 * sp.pi

# x' = eps*V1(t, x)
V = {
    1: sp.Matrix(
        [
            y * z * sp.cos(t) - x / 2,
            x * z * sp.sin(t) + y**2 * sp.cos(2 * t),
            x * y - z * sp.sin(t),
        ]
    )
}


def bracket(A, B):
    return (B.jacobian(coords) * A - A.jacobian(coords) * B).applyfunc(sp.expand)


def integral_from_zero(M):
    return M.applyfunc(lambda e: sp.expand(sp.integrate(e.subs(t, s), (s, 0, t))))


xx = sp.Symbol("xx")
series = sp.series(xx / (1 - sp.exp(-xx)), xx, 0, N + 1).removeO()
beta = [series.coeff(xx, n) for n in range(N + 1)]

zero = sp.zeros(3, 1)
W = {}
# a[(j, m)]: the grade-m part of ad_W^j V
a = {}
for m in range(1, N + 1):
    a[(0, m)] = V.get(m, zero)
    for j in range(1, m):
        acc = zero
        for k in range(1, m - j + 1):
            acc = acc + bracket(W[k], a[(j - 1, m - k)])
        a[(j, m)] = acc
    dW = zero
    for j in range(m):
        dW = dW + beta[j] * a[(j, m)]
    W[m] = integral_from_zero(dW)
    F = (W[m].subs(t, T) / T).applyfunc(sp.expand)
    print("order %d  [%s]" % (m, ", ".join(str(c) for c in F)), flush=True)
print("sympy-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
