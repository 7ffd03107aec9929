"""What the SymEngine scripts share: 2*pi-periodic time dependence in
exponential form, integrals in time, Lie brackets, printing.

SymEngine has no `integrate`, so time enters as the symbol E = exp(i*t):
cos(k*t) = (E^k + E^-k)/2, sin(k*t) = (E^k - E^-k)/(2i). After `expand`
an expression is a sum of terms c * t^n * E^k * (rest free of t), and each
term is integrated from 0 to t by its closed form. Results are printed
with E^k turned back into cos(k*t) + i*sin(k*t), whose imaginary parts
cancel for real expressions.
"""
import symengine as se

t = se.Symbol("t")
E = se.Symbol("E")  # exp(i*t)
I = se.I
T = 2 * se.pi


def cos_t(k):
    """cos(k*t) in exponential form."""
    return (E**k + E**-k) / 2


def sin_t(k):
    """sin(k*t) in exponential form."""
    return (E**k - E**-k) / (2 * I)


def terms(e):
    """The terms of an expanded expression."""
    e = se.expand(e)
    if e == 0:
        return []
    return list(e.args) if isinstance(e, se.Add) else [e]


def split(term):
    """A term as (n, k, rest) with term = rest * t^n * E^k."""
    powers = term.as_powers_dict()
    n, k = int(powers.get(t, 0)), int(powers.get(E, 0))
    return n, k, term * t**-n * E**-k


def integral_from_zero(e):
    """The integral over s from 0 to t of e(s)."""
    out = []
    for term in terms(e):
        n, k, rest = split(term)
        if k == 0:
            out.append(rest * t ** (n + 1) / (n + 1))
            continue
        # int_0^t s^n e^(a s) ds = e^(a t) sum_j (-1)^j n!/(n-j)! t^(n-j)/a^(j+1)
        #                          - (-1)^n n!/a^(n+1), with a = i*k
        a = I * k
        falling = 1
        acc = 0
        for j in range(n + 1):
            acc += (-1) ** j * falling * t ** (n - j) / a ** (j + 1)
            falling *= n - j
        out.append(rest * (E**k * acc - (-1) ** n * factorial(n) / a ** (n + 1)))
    return se.expand(se.Add(*out)) if out else se.Integer(0)


def at_period(e):
    """e at t = T = 2*pi, where E = 1."""
    return se.expand(e.subs({t: T, E: 1}))


def mean(e):
    """The mean of e over one period [0, 2*pi]."""
    return se.expand(at_period(integral_from_zero(e)) / T)


def real_form(e):
    """e with E^k written as cos(k*t) + i*sin(k*t) (real for real e)."""
    out = []
    for term in terms(e):
        n, k, rest = split(term)
        out.append(rest * t**n * (se.cos(k * t) + I * se.sin(k * t)))
    return se.expand(se.Add(*out)) if out else se.Integer(0)


def bracket(A, B, coords):
    """[A, B] = DB*A - DA*B, expanded."""
    return (B.jacobian(coords) * A - A.jacobian(coords) * B).applyfunc(se.expand)


def beta(n_max):
    """Coefficients of x/(1 - exp(-x)) up to x^n_max.

    Inverts the series of (1 - exp(-x))/x = sum (-x)^k/(k+1)! term by term:
    symengine 0.15.0's `series` of the quotient itself got its last two
    coefficients wrong (x^6: 1/4320 instead of 1/30240, asked to order 7).
    """
    c = [se.Rational((-1) ** k, 1) / factorial(k + 1) for k in range(n_max + 1)]
    b = [se.Integer(1)]
    for n in range(1, n_max + 1):
        b.append(-sum((b[j] * c[n - j] for j in range(n)), se.Integer(0)))
    return b


def factorial(n):
    out = se.Integer(1)
    for i in range(2, n + 1):
        out *= i
    return out


def stroboscopic(V, coords, N, show):
    """Stroboscopic averaged field to order N of x' = sum eps^m V[m](t, x).

    The generator W(t) = sum eps^k W_k(t) of the time-t flow solves
    W' = sum_j beta_j ad_W^j V, W(0) = 0, built order by order; the averaged
    field is F_k = W_k(T)/T. `show(m, F_m)` is called after each order.
    """
    b = beta(N)
    zero = se.zeros(len(coords), 1)
    W = {}
    a = {}  # a[(j, m)]: the grade-m part of ad_W^j V
    for m in range(1, N + 1):
        a[(0, m)] = V.get(m, zero)
        for j in range(1, m):
            acc = zero
            for k in range(1, m - j + 1):
                acc = acc + bracket(W[k], a[(j - 1, m - k)], coords)
            a[(j, m)] = acc
        dW = zero
        for j in range(m):
            dW = dW + b[j] * a[(j, m)]
        W[m] = dW.applyfunc(integral_from_zero)
        show(m, W[m].applyfunc(lambda e: se.expand(at_period(e) / T)))


def field_text(F):
    """A field as `[c1, c2, ...]`, time written with cos and sin."""
    return "[%s]" % ", ".join(str(real_form(c)) for c in F)
