"""The one band rule: the first bin at or above a frequency, checked against exact
rational arithmetic (fractions.Fraction) on the decimal values a user types."""

import math
from fractions import Fraction

import numpy as np
import pytest

import chirpsift as cs
import chirpsift.filter
import chirpsift.reference

# f_low = a / 10 Hz for a = 1..399 (0.1 to 39.9 Hz) and df = 1 / d Hz for d = 1..299.
PAIRS = [(a, d) for a in range(1, 400) for d in range(1, 300)]


def exact_first_bin(a, d):
    """Smallest k with k * (1/d) >= a/10, in rationals."""
    return math.ceil(Fraction(a, 10) / Fraction(1, d))


@pytest.mark.parametrize("band", [chirpsift.filter.band, chirpsift.reference.band], ids=["rust", "reference"])
def test_first_bin_equals_exact_rational_value(band):
    wrong = [(a / 10, d) for a, d in PAIRS if band(a / 10, None, 1 / d, 10**6)[0] != exact_first_bin(a, d)]
    assert not wrong, f"{len(wrong)} of {len(PAIRS)} pairs off, e.g. f_low, 1/df = {wrong[:5]}"


def test_sweep_holds_pairs_where_plain_division_is_one_bin_high():
    # The sweep is only a check if ceil(f_low / df) alone goes wrong on some pairs
    # (0.1 / (1/70) = 7.000000000000001 in float64, for one).
    naive_off = sum(math.ceil((a / 10) / (1 / d)) != exact_first_bin(a, d) for a, d in PAIRS)
    assert naive_off > 100
    assert math.ceil(0.1 / (1 / 70)) == 8 and exact_first_bin(1, 70) == 7


@pytest.mark.parametrize("a, d", [(1, 70), (1, 30), (3, 70), (7, 30)])
def test_kernels_filter_the_bin_on_the_edge(a, d, impl):
    # A template with power only in the exact edge bin k = a d / 10 has a nonzero
    # norm, and one with power only in the bin below has none.
    k = exact_first_bin(a, d)
    n_freq = 4 * k + 8
    psd = np.ones(n_freq)
    h = np.zeros((2, n_freq), complex)
    h[0, k] = 1.0
    h[1, k - 1] = 1.0
    s = impl.sigma(h, psd, 1 / d, a / 10)
    assert s[0] == pytest.approx(np.sqrt(4 / d)) and s[1] == 0.0


def test_band_upper_edge_and_clipping():
    assert cs.filter.band(1.0, 3.0, 0.5, 100) == chirpsift.reference.band(1.0, 3.0, 0.5, 100) == (2, 6)
    assert cs.filter.band(80.0, 90.0, 0.5, 100) == (100, 100)
