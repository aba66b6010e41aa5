"""Individuals chart limits (lots/control.py) against ISO 7870-2 and the normal distribution."""

import numpy as np

from surfcheck.lots.control import D2_OF_TWO, E2, individuals_limits


def test_the_factor_is_three_over_d2_of_two():
    # d2 for n = 2 is E|X1 - X2| / sigma = 2 / sqrt(pi) for normal X (a published closed form);
    # ISO 7870-2's table gives d2 = 1.128 and the individuals factor 2.66
    assert abs(D2_OF_TWO - 2 / np.sqrt(np.pi)) < 5e-4
    assert round(E2, 2) == 2.66


def test_limits_of_a_small_series():
    # x = 1, 3, 2: mean 2, moving ranges 2 and 1 (mean 1.5); limits 2 -/+ 2.66 * 1.5 (hand computation)
    limits = individuals_limits([1.0, np.nan, 3.0, 2.0])
    assert (limits.centre, limits.mean_moving_range) == (2.0, 1.5)
    assert np.isclose(limits.upper, 2 + 1.5 * 3 / 1.128) and np.isclose(limits.lower, 2 - 1.5 * 3 / 1.128)
    assert limits.outside([2.0, 6.1, -2.1, np.nan]).tolist() == [False, True, True, False]
    assert individuals_limits([1.0, np.nan]) is None


def test_limits_of_a_normal_process_are_three_sigma():
    # for independent normal values the limits estimate mean +/- 3 sigma (Shewhart's three-sigma limits)
    rng = np.random.default_rng(7)
    limits = individuals_limits(rng.normal(10.0, 0.5, 200_000))
    assert abs(limits.upper - 11.5) < 0.01 and abs(limits.lower - 8.5) < 0.01
