"""Case d, by hand in SymEngine: vibrational averaging to order 3.

x' = f0(t, x) + eps*f1(x) with f0 = cos(t)*G, G = [0, b*sin(th)].
Change of coordinates x = Phi(t, z): th = Th, p = P + b*sin(t)*sin(Th).
Then z' = DPhi^-1 (f0(t, Phi) + eps*f1(Phi) - dPhi/dt) = eps*h1(t, z),
and h1 is averaged stroboscopically to order 3 (se_tools.stroboscopic).
Prints `order k  [F_k]`.
"""
import sys
import time

import symengine as se

from se_tools import E, I, cos_t, field_text, sin_t, stroboscopic, t

t0 = time.perf_counter()
eps = se.Symbol("eps")
th, p = se.symbols("th p")
k, c, b = se.symbols("k c b")
z = se.Matrix([th, p])


def f0(X):
    return se.Matrix([0, b * cos_t(1) * se.sin(X[0])])


def f1(X):
    return se.Matrix([X[1], -k * se.sin(X[0]) - c * X[1]])


def d_dt(e):
    # d/dt E^k = i*k*E^k
    return se.expand(se.diff(e, t) + I * E * se.diff(e, E))


# x = Phi(t, z)
Phi = se.Matrix([th, p + b * sin_t(1) * se.sin(th)])
D = Phi.jacobian(z)
rhs = D.inv() * (f0(Phi) + eps * f1(Phi) - Phi.applyfunc(d_dt))
rhs = rhs.applyfunc(se.expand)
assert all(e.coeff(eps, 0) == 0 for e in rhs)  # the fast part is gone
V = {1: rhs.applyfunc(lambda e: e.coeff(eps, 1))}


def show(m, F):
    print("order %d  %s" % (m, field_text(F)), flush=True)


stroboscopic(V, z, 3, show)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
