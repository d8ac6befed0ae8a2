"""Review conditions on the terminal phase (pkwidgets.terminal_flags) on small constructed arrays.

Each expected array is derived by hand beside the inputs from the condition's
stated definition; the thresholds are: AUCPBEO above 20 % (common practice,
no source), half-lives of two rules more than 25 % apart (common practice,
no source; the share is our choice), half-life interval upper/lower above 2
(our choice).
"""

from __future__ import annotations

import numpy as np

from pkwidgets.terminal_flags import (back_extrapolation_high, fit_starts_at_first_sample,
                                      half_life_interval_wide, terminal_phase_ambiguous)

NAN, INF = np.nan, np.inf


def test_iv_fit_from_the_first_sample():
    lamzll = np.array([0.25, 0.25, 2.0, NAN, 0.25 + 1e-12])
    first = np.array([0.25, 0.25, 0.25, 0.25, 0.25])
    iv = np.array([True, False, True, True, True])
    # IV and starts at the first sample | not IV | starts later | no fit | same time up to rounding
    expected = np.array([True, False, False, False, True])
    np.testing.assert_array_equal(fit_starts_at_first_sample(lamzll, first, iv), expected)


def test_back_extrapolated_share_above_20_percent():
    aucpbeo = np.array([19.99, 20.0, 20.01, 28.0, NAN])
    # strictly above 20 %: 20.0 itself is not flagged; no AUCPBEO (not IV bolus) is not flagged
    np.testing.assert_array_equal(back_extrapolation_high(aucpbeo), [False, False, True, True, False])
    np.testing.assert_array_equal(back_extrapolation_high(aucpbeo, limit=25.0), [False, False, False, True, False])


def test_rules_disagreeing_make_the_terminal_phase_ambiguous():
    ours = np.array([10.0, 12.5, 12.6, 7.4, 7.6, NAN, 5.0, NAN])
    adj_r2 = np.array([10.0, 10.0, 10.0, 10.0, 10.0, 10.0, NAN, NAN])
    # |a - b| > 0.25 b: 0 | 2.5 (not >) | 2.6 | 2.6 | 2.4 | one rule without a fit | the other | neither
    expected = np.array([False, False, True, True, False, True, True, False])
    np.testing.assert_array_equal(terminal_phase_ambiguous(ours, adj_r2), expected)


def test_wide_half_life_interval():
    lower = np.array([5.0, 5.0, 5.0, 5.0, NAN])
    upper = np.array([9.0, 10.0, 10.5, INF, NAN])
    # upper / lower: 1.8 | 2.0 (not > 2) | 2.1 | no finite upper bound (lambda z may be 0) | no interval
    np.testing.assert_array_equal(half_life_interval_wide(lower, upper), [False, False, True, True, False])
    np.testing.assert_array_equal(half_life_interval_wide(lower, upper, max_ratio=1.5),
                                  [True, True, True, True, False])
