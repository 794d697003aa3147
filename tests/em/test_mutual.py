"""Carter's induced-EMF mutual impedance against published and computed check values."""

import numpy as np
import pytest

from .mutual_reference import parallel_mutual, side_by_side_half_wave

F = 299_792_458.0  # lambda = 1 m


# Shared REFERENCES.md section 2.2, computed (side-by-side half-wave, eta = 376.730 ohm); the
# 0.25/0.5/1.0 values are also the textbook numbers of Kraus, Antennas, and Balanis (from memory).
@pytest.mark.parametrize("d, z", [(0.1, 67.29 + 7.53j), (0.25, 40.76 - 28.33j),
                                  (0.5, -12.52 - 29.91j), (1.0, 4.01 + 17.73j),
                                  (2.0, 1.08 + 9.36j)])
def test_side_by_side_closed_form(d, z):
    np.testing.assert_allclose(side_by_side_half_wave(d, F), z, atol=0.01)


def test_general_form_matches_closed_form():
    # Balanis section 8.6: the general integral reduces to eqs. 8-71a,b for side-by-side half waves.
    for d in (0.1, 0.3, 0.75):
        np.testing.assert_allclose(parallel_mutual(0.5, 0.5, d, 0.0, F),
                                   side_by_side_half_wave(d, F), atol=1e-6)


# Shared REFERENCES.md section 2.2, computed: echelon (d = 0.5, stagger b) and collinear.
@pytest.mark.parametrize("d, b, z", [(0.5, 0.25, -12.89 - 22.13j), (0.5, 0.5, -11.88 - 7.84j),
                                     (1e-9 + 0.0, 0.6, 14.66 - 4.01j)])
def test_staggered_values(d, b, z):
    np.testing.assert_allclose(parallel_mutual(0.5, 0.5, max(d, 1e-6), b, F), z, atol=0.02)


def test_self_impedance_limit():
    # Shared REFERENCES.md section 2.1: d = a = 1e-4 lambda reproduces 73.08 + j42.48 ohm.
    np.testing.assert_allclose(parallel_mutual(0.5, 0.5, 1e-4, 0.0, F), 73.08 + 42.48j, atol=0.02)
