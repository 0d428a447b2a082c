"""The bracket the rates report: auxiliary-channel bounds around the exact i.i.d. rate, the tightest bounds chosen.

Outside references: the exact i.i.d. rate of an enumerable channel by the Cover & Thomas Thm 4.5.1 block bracket
(exact forward recursion over all output sequences; helper in tests/test_window.py); for any auxiliary channel q
and outputs of the true channel, E[ln q(Y|X) - ln q(Y)]/n <= I <= -E[ln q(Y)]/n - h(Y|X) (cross-entropy >= entropy;
Arnold, Loeliger, Vontobel, Kavcic, Zeng, IEEE Trans. IT 52(8), 2006).
"""

import numpy as np
import pytest
from test_window import BASE_A, HITS_A, LAW_A, SYM_A, _iid_bracket

import capacity  # noqa: F401
from capacity.information.trellis import trellis_rates


@pytest.mark.parametrize("kept", [0, 1])
def test_reduced_state_bounds_enclose_the_exact_rate(kept):
    lo_exact, up_exact, mass = _iid_bracket(HITS_A, BASE_A, SYM_A, LAW_A, 5)
    assert mass > 1 - 1e-9 and up_exact - lo_exact < 1e-3
    r = trellis_rates(HITS_A, BASE_A, SYM_A, LAW_A, n_symbols=20_000, n_runs=8, seed=3, kept_lags=kept)
    se_lo = r["lower"].std(ddof=1) / np.sqrt(r["lower"].size)
    se_up = r["upper"].std(ddof=1) / np.sqrt(r["upper"].size)
    assert r["lower"].mean() <= up_exact + 4 * se_lo  # auxiliary lower bound below the exact rate
    assert r["upper"].mean() >= lo_exact - 4 * se_up  # auxiliary upper bound above it
    # and they are real bounds here, not the rate itself: the dropped lags cost something
    assert r["lower"].mean() < lo_exact - 4 * se_lo or r["upper"].mean() > up_exact + 4 * se_up
    # with every lag kept both equal the rate (auxiliary channel = true channel)
    full = trellis_rates(HITS_A, BASE_A, SYM_A, LAW_A, n_symbols=20_000, n_runs=8, seed=3, kept_lags=2)
    se = full["lower"].std(ddof=1) / np.sqrt(8)
    assert abs(full["lower"].mean() - 0.5 * (lo_exact + up_exact)) < 4 * se + 1e-3
    np.testing.assert_allclose(full["upper"], full["lower"], rtol=1e-9)
