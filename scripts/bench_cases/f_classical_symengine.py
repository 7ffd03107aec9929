"""Case f, by hand in SymEngine: classical averaging to order 3.

x' = eps*f1(t, x) + eps^2*f2(t, x). Substitute x = y + sum eps^k w_k(t, y)
with zero-mean w_k and y' = sum eps^k G_k(y); order eps^k gives
dw_k/dt + G_k = [eps^k part of f(t, y + sum eps^i w_i)] - sum Dw_i G_j
(i + j = k), so G_k is the mean over 2*pi of the right-hand side and w_k
its zero-mean antiderivative (time in exponential form, see se_tools).
Prints `order k  [G_k]`.
"""
import sys
import time

import symengine as se

from se_tools import cos_t, field_text, integral_from_zero, mean, sin_t

t0 = time.perf_counter()
eps = se.Symbol("eps")
u, v = se.symbols("u v")
Y = se.Matrix([u, v])
N = 3
R = se.Rational


def f(X):
    uu, vv = X
    f1 = se.Matrix(
        [
            vv**2 * cos_t(1) - R(1, 3) * uu + uu * vv * sin_t(2),
            uu**2 * sin_t(1) - R(1, 4) * vv + uu * vv**2 * cos_t(1),
        ]
    )
    f2 = se.Matrix([uu * cos_t(1), vv**2 * sin_t(1)])
    return eps * f1 + eps**2 * f2


def zero_mean_antiderivative(e):
    a = integral_from_zero(e)
    return se.expand(a - mean(a))


G, w = {}, {}
for k in range(1, N + 1):
    x = Y
    for i in range(1, k):
        x = x + eps**i * w[i]
    rhs = f(x).applyfunc(lambda e: se.expand(e).coeff(eps, k))
    for i in range(1, k):
        rhs = rhs - w[i].jacobian(Y) * G[k - i]
    rhs = rhs.applyfunc(se.expand)
    G[k] = rhs.applyfunc(mean)
    w[k] = (rhs - G[k]).applyfunc(zero_mean_antiderivative)
    print("order %d  %s" % (k, field_text(G[k])), flush=True)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
