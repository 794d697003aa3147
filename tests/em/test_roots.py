"""Brent's method against scipy.optimize.brentq (the reference implementation of the same
algorithm in a general-purpose library) and against closed-form roots."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from buildsheet.em.roots import brent_root
from buildsheet.errors import BuildError

CASES = [
    (lambda x: x**3 - 2 * x - 5, 2.0, 3.0),              # Wallis's cubic (a classic test case)
    (lambda x: math.cos(x) - x, 0.0, 1.0),                # Dottie number
    (lambda x: math.exp(x) - 10.0, 0.0, 5.0),             # ln 10
    (lambda x: math.tan(x) - 1.0, 0.0, 1.5),              # pi / 4
    (lambda x: 1e-9 * (x - 0.3), -1.0, 1.0),              # a very flat function
]


@pytest.mark.parametrize("f, a, b", CASES)
def test_agrees_with_scipy_brentq(f, a, b):
    ours = brent_root(f, a, b, xtol=1e-12)
    ref = brentq(f, a, b, xtol=1e-12)
    assert abs(ours - ref) < 1e-10


def test_closed_form_roots():
    assert abs(brent_root(lambda x: math.cos(x) - math.sin(x), 0.0, 1.5) - math.pi / 4) < 1e-11
    assert abs(brent_root(lambda x: math.exp(x) - 10.0, 0.0, 5.0) - math.log(10.0)) < 1e-11
    assert brent_root(lambda x: x, 0.0, 1.0) == 0.0            # a root at an end
    assert abs(brent_root(lambda x: (x - 1.0) ** 3, 0.0, 3.0, xtol=1e-10) - 1.0) < 1e-9  # triple


def test_xtol_is_honoured_and_random_brackets():
    rng = np.random.default_rng(3)
    for r in rng.uniform(-5, 5, 50):
        root = brent_root(lambda x, r=r: math.atan(x - r), r - 7.0, r + 3.0, xtol=1e-6)
        assert abs(root - r) < 1e-6


def test_no_sign_change_is_an_error():
    with pytest.raises(BuildError, match="no sign change"):
        brent_root(lambda x: x * x + 1.0, -1.0, 1.0)
