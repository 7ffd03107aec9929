"""Case f, by hand in SymPy: classical averaging to order 3.

x' = eps*f1(t, x) + eps^2*f2(t, x). Substitute x = y + sum eps^k w_k(t, y)
with zero-mean w_k and y' = sum eps^k G_k(y); order eps^k gives
dw_k/dt + G_k = [eps^k part of f(t, y + sum eps^i w_i)] - sum Dw_i G_j
(i + j = k), so G_k is the mean over T = 2*pi of the right-hand side and
w_k its zero-mean antiderivative. Prints `order k  [G_k]`.
"""
import sys
import time

import sympy as sp

t0 = time.perf_counter()
t, s, eps = sp.symbols("t s eps")
u, v = sp.symbols("u v")
Y = sp.Matrix([u, v])
N = 3
T = 2 * sp.pi
R = sp.Rational


def f(tt, X):
    uu, vv = X
    f1 = sp.Matrix(
        [
            vv**2 * sp.cos(tt) - R(1, 3) * uu + uu * vv * sp.sin(2 * tt),
            uu**2 * sp.sin(tt) - R(1, 4) * vv + uu * vv**2 * sp.cos(tt),
        ]
    )
    f2 = sp.Matrix([uu * sp.cos(tt), vv**2 * sp.sin(tt)])
    return eps * f1 + eps**2 * f2


def mean(e):
    return sp.expand(sp.integrate(e.subs(t, s), (s, 0, T)) / T)


def zero_mean_antiderivative(e):
    a = sp.expand(sp.integrate(e.subs(t, s), (s, 0, t)))
    return sp.expand(a - mean(a))


G, w = {}, {}
for k in range(1, N + 1):
    x = Y + sum((eps**i * w[i] for i in range(1, k)), sp.zeros(2, 1))
    rhs = f(t, x).applyfunc(lambda e: sp.expand(e).coeff(eps, k))
    for i in range(1, k):
        rhs = rhs - w[i].jacobian(Y) * G[k - i]
    rhs = rhs.applyfunc(sp.expand)
    G[k] = rhs.applyfunc(mean)
    w[k] = (rhs - G[k]).applyfunc(zero_mean_antiderivative)
    print("order %d  [%s]" % (k, ", ".join(str(e) for e in G[k])), flush=True)
print("sympy-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
