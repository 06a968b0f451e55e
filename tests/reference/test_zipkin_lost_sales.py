"""Optimal lost-sales costs against the published table.

Source: Zipkin, P. (2008), "Old and new methods for lost-sales inventory systems", Operations
Research 56(5), table of optimal average costs, Poisson demand with mean 5, h = 1 (values from
memory, as given in the project's issue).
"""
import pytest

from invbench import solve
from tests.conftest import lost_sales

# (lead time, shortage cost) -> optimal average cost per period; Zipkin (2008), from memory
ZIPKIN_2008 = {
    (1, 4): 4.04, (1, 9): 5.44, (1, 19): 6.68, (1, 39): 7.84,
    (2, 4): 4.40, (2, 9): 6.09, (2, 19): 7.66, (2, 39): 9.11,
    (3, 4): 4.60, (3, 9): 6.53, (3, 19): 8.36, (3, 39): 10.04,
    (4, 4): 4.73, (4, 9): 6.84, (4, 19): 8.89, (4, 39): 10.79,
}


def _params():
    for (L, p), v in ZIPKIN_2008.items():
        marks = [pytest.mark.slow] if L == 4 else []
        yield pytest.param(L, p, v, marks=marks, id=f"L{L}-p{p}")


@pytest.mark.parametrize("L,p,expected", list(_params()))
def test_optimal_cost_matches_zipkin_2008(L, p, expected):
    res = solve(lost_sales(L, p))
    assert res.converged
    assert res.lower <= res.cost <= res.upper
    assert res.gap <= 1e-6
    assert abs(res.cost - expected) <= 0.005, f"L={L}, p={p}: {res.cost:.4f} vs {expected}"
