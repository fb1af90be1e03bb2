"""The gate's rank normalisation ranks draws with numpy (``diagnostics.average_ranks``) so
that no command imports scipy.stats for it; checked against scipy.stats.rankdata (scipy as
reference library, docs/references.md "MCMC diagnostics"), ties included."""

import numpy as np
import pytest
from scipy import stats

from qualbayes.inference.diagnostics import average_ranks


@pytest.mark.parametrize("decimals", [None, 1, 0])  # continuous, some ties, many ties
def test_average_ranks_equal_scipy_rankdata(decimals):
    rng = np.random.default_rng(11)
    a = rng.normal(size=(7, 4000))
    if decimals is not None:
        a = np.round(a, decimals)
    a[3] = 2.5  # a constant row: every draw ties
    a[5, ::2] = a[5, 1::2]  # pairs of equal values
    want = stats.rankdata(a, method="average", axis=1)
    np.testing.assert_array_equal(average_ranks(a), want)


def test_average_ranks_of_one_row_and_integers():
    a = np.array([[2, 2, 1, 5, 2, 0]])
    np.testing.assert_array_equal(average_ranks(a),
                                  stats.rankdata(a, method="average", axis=1))
