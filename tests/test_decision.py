"""The seam-level decision: a seam fails where a station exceeds its tolerance by k_n u, k_n from
Sidak's correction over the seam's stations, so its false-fail rate is one station's at k."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from surfcheck.grading.continuity import seam_fail_coverage


def test_one_station_keeps_the_coverage_factor():
    assert seam_fail_coverage(2.0, 1) == pytest.approx(2.0, abs=1e-12)


def test_sidak_per_comparison_level_for_ten_comparisons():
    # familywise 0.05 over 10 independent comparisons: each at 1 - 0.95^(1/10) = 0.005116 (Sidak 1967,
    # J. Amer. Statist. Assoc. 62:626; the figure as tabulated by Abdi 2007, "The Bonferroni and Sidak
    # corrections for multiple comparisons", from memory)
    k_single = norm.isf(0.05)
    assert norm.sf(seam_fail_coverage(k_single, 10)) == pytest.approx(0.005116, abs=5e-7)


def test_a_conforming_seam_fails_at_the_rate_of_one_station():
    # Monte Carlo: n stations, each true jump exactly at its tolerance, errors normal with sd u; the
    # seam fails where some station reads value - k_n u > tolerance. Its rate must be 1 - Phi(k)
    # (2.3 % at k = 2) for every n, where station-wise k alone gives 1 - (1 - 0.023)^n.
    rng = np.random.default_rng(5)
    draws = 40000
    for n in (1, 10, 48):
        errors = rng.standard_normal((draws, n))
        seam_fails = (errors > seam_fail_coverage(2.0, n)).any(axis=1).mean()
        assert seam_fails == pytest.approx(norm.sf(2.0), abs=4.0 * np.sqrt(norm.sf(2.0) / draws))
    station_wise = (rng.standard_normal((draws, 48)) > 2.0).any(axis=1).mean()
    assert station_wise > 0.5
