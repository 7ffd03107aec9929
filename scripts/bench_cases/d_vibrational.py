"""Case d, by hand in SymPy: vibrational averaging to order 3.

x' = f0(t, x) + eps*f1(x) with f0 = cos(t)*G, G = [0, b*sin(th)].
Change of coordinates x = Phi(t, z): the flow of G for the time
U(t) = sin(t), i.e. th = Th, p = P + b*sin(t)*sin(Th). Then
z' = DPhi^-1 (f0(t, Phi) + eps*f1(Phi) - dPhi/dt) = eps*h1(t, z), and
h1 is averaged stroboscopically to order 3 with the generator recursion
W' = V + 1/2 [W, V] + 1/12 [W, [W, V]] ([A, B] = DB*A - DA*B), integrals
from 0 to t, F_k = W_k(2*pi)/(2*pi). Prints `order k  [F_k]`.
"""
import sys
import time

import sympy as sp

t0 = time.perf_counter()
t, s, eps = sp.symbols("t s eps")
th, p = sp.symbols("th p")
k, c, b = sp.symbols("k c b")
z = sp.Matrix([th, p])
N = 3
T = 2 * sp.pi


def f0(tt, X):
    return sp.Matrix([0, b * sp.cos(tt) * sp.sin(X[0])])


def f1(X):
    return sp.Matrix([X[1], -k * sp.sin(X[0]) - c * X[1]])


# x = Phi(t, z)
Phi = sp.Matrix([th, p + b * sp.sin(t) * sp.sin(th)])
D = Phi.jacobian(z)
rhs = D.inv() * (f0(t, Phi) + eps * f1(Phi) - Phi.diff(t))
rhs = rhs.applyfunc(lambda e: sp.expand(sp.simplify(e)))
assert all(sp.expand(e.coeff(eps, 0)) == 0 for e in rhs)  # the fast part is gone
V = {1: rhs.applyfunc(lambda e: e.coeff(eps, 1))}


def bracket(A, B):
    return (B.jacobian(z) * A - A.jacobian(z) * B).applyfunc(sp.expand)


def integral_from_zero(M):
    return M.applyfunc(lambda e: sp.expand(sp.integrate(e.subs(t, s), (s, 0, t))))


beta = [sp.Integer(1), sp.Rational(1, 2), sp.Rational(1, 12)]
zero = sp.zeros(2, 1)
W = {}
a = {}
for m in range(1, N + 1):
    a[(0, m)] = V.get(m, zero)
    for j in range(1, m):
        acc = zero
        for kk in range(1, m - j + 1):
            acc = acc + bracket(W[kk], a[(j - 1, m - kk)])
        a[(j, m)] = acc
    dW = zero
    for j in range(m):
        dW = dW + beta[j] * a[(j, m)]
    W[m] = integral_from_zero(dW)
    F = (W[m].subs(t, T) / T).applyfunc(sp.expand)
    print("order %d  [%s]" % (m, ", ".join(str(e) for e in F)), flush=True)
print("sympy-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
