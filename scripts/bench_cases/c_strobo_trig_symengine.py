"""Case c, by hand in SymEngine: stroboscopic averaged field to order 4.

The generator recursion W' = V + 1/2 [W, V] + 1/12 [W, [W, V]] - ...
of se_tools.stroboscopic, F_k = W_k(2*pi)/(2*pi). Prints `order k  [F_k]`.
"""
import sys
import time

import symengine as se

from se_tools import cos_t, field_text, sin_t, stroboscopic

t0 = time.perf_counter()
q, p = se.symbols("q p")
coords = se.Matrix([q, p])

# x' = eps*V1(t, x)
V = {1: se.Matrix([p * cos_t(1) - se.sin(q), -se.sin(q) * sin_t(2) - p / 2])}


def show(m, F):
    print("order %d  %s" % (m, field_text(F)), flush=True)


stroboscopic(V, coords, 4, show)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
