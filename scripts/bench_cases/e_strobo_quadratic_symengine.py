"""Case e, by hand in SymEngine: stroboscopic averaged field to order 6.

The generator recursion W' = V + 1/2 [W, V] + 1/12 [W, [W, V]] - ...
of se_tools.stroboscopic, F_k = W_k(2*pi)/(2*pi). Prints `order k  [F_k]`.
"""
import sys
import time

import symengine as se

from se_tools import cos_t, field_text, sin_t, stroboscopic

t0 = time.perf_counter()
x, y, z = se.symbols("x y z")
coords = se.Matrix([x, y, z])

# x' = eps*V1(t, x)
V = {
    1: se.Matrix(
        [
            y * z * cos_t(1) - x / 2,
            x * z * sin_t(1) + y**2 * cos_t(2),
            x * y - z * sin_t(1),
        ]
    )
}


def show(m, F):
    print("order %d  %s" % (m, field_text(F)), flush=True)


stroboscopic(V, coords, 6, show)
print("symengine-compute-ms %.1f" % ((time.perf_counter() - t0) * 1e3), file=sys.stderr)
