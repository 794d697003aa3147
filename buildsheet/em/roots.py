"""The one bracketing root finder of the project: Brent's method.

Every resonance and band-edge search that has a sign change to work with comes here (closed-
form resonant length, the 2:1 SWR edges). Own code, so a command that needs one root does not
import scipy.optimize (most of a small command's start-up time).

R. P. Brent, Algorithms for Minimization without Derivatives (Prentice-Hall, 1973), ch. 4:
inverse quadratic interpolation or secant steps, falling back to bisection whenever a step
would leave the bracket or shrink it too slowly, so convergence is guaranteed and superlinear
for smooth functions.
"""

from __future__ import annotations

from collections.abc import Callable

from buildsheet.errors import BuildError

_EPS = 2.220446049250313e-16  # double-precision machine epsilon


def brent_root(f: Callable[[float], float], a: float, b: float, *, xtol: float = 1e-12,
               rtol: float = 4 * _EPS, max_iter: int = 200) -> float:
    """A root of ``f`` in [a, b], where f(a) and f(b) differ in sign (or one is zero).

    Stops when the bracket is narrower than 2 (xtol + rtol |x|); same units as a and b.
    Raises BuildError when the ends do not bracket a sign change.
    """
    fa, fb = f(a), f(b)
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    if (fa > 0) == (fb > 0):
        raise BuildError(f"no sign change between {a:g} and {b:g} (root search)")
    c, fc = a, fa
    d = e = b - a
    for _ in range(max_iter):
        if (fb > 0) == (fc > 0):                 # keep the root between b and c
            c, fc = a, fa
            d = e = b - a
        if abs(fc) < abs(fb):                    # b is the best estimate
            a, b, c = b, c, b
            fa, fb, fc = fb, fc, fb
        tol = 2.0 * rtol * abs(b) + 0.5 * xtol
        m = 0.5 * (c - b)
        if abs(m) <= tol or fb == 0.0:
            return b
        if abs(e) >= tol and abs(fa) > abs(fb):
            s = fb / fa
            if a == c:                           # secant step
                p, q = 2.0 * m * s, 1.0 - s
            else:                                # inverse quadratic interpolation
                q, r = fa / fc, fb / fc
                p = s * (2.0 * m * q * (q - r) - (b - a) * (r - 1.0))
                q = (q - 1.0) * (r - 1.0) * (s - 1.0)
            if p > 0:
                q = -q
            p = abs(p)
            if 2.0 * p < min(3.0 * m * q - abs(tol * q), abs(e * q)):
                e, d = d, p / q                  # accept the interpolation
            else:
                d = e = m                        # bisect
        else:
            d = e = m
        a, fa = b, fb
        b += d if abs(d) > tol else (tol if m > 0 else -tol)
        fb = f(b)
    raise BuildError(f"root search between {a:g} and {c:g} did not converge")
