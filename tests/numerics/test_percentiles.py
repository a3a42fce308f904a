"""Fast exact percentiles of many rows (peatburn.numerics.percentiles) against numpy.quantile."""

import numpy as np
import pytest

from peatburn.numerics.percentiles import row_quantiles


@pytest.mark.parametrize("kind", ["lognormal", "ties", "constant_rows", "mixed"])
def test_row_quantiles_equal_numpys(kind):
    """Reference: numpy.quantile (linear interpolation). The tail selection of both ends in one
    pass must give the same values exactly, with its fallback for rows of ties or constants."""
    rng = np.random.default_rng({"lognormal": 1, "ties": 2, "constant_rows": 3, "mixed": 4}[kind])
    n = 6000  # above 4 x the subsample: the tail selection is used
    a = rng.lognormal(0.0, 0.5, (37, n))
    if kind == "ties":
        a = np.round(a, 1)  # many equal values around both thresholds
    elif kind == "constant_rows":
        a[::3] = 2.5
    elif kind == "mixed":
        a[1] = 0.0
        a[2, : n // 2] = 1.0  # half the row tied at its low end
        a[3] = np.sort(a[3])  # the subsample (first draws) all from the low tail
        a[4] = -a[4]
    for qs in ((0.025, 0.975), (0.05,), (0.9, 0.99), (0.001, 0.999, 0.025)):
        got = row_quantiles(a.copy(), qs)
        ref = np.quantile(a, qs, axis=1)
        for g, r in zip(got, ref):
            np.testing.assert_array_equal(g, r)
