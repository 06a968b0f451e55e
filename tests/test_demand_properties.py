"""Arbitrary demand tables: a valid pmf, or SpecError/BudgetError naming a demand field — never
another exception, and never an allocation beyond what the support limit allows.

The rules forbid timed tests, so "refused before allocating" is checked through memory: every
call runs under a small support limit, and tracemalloc (which sees numpy's arrays) must report
a peak of a few arrays of that size at most. How long the refusals take is printed by
experiments/perf/input_refusals.py.
"""
from __future__ import annotations

import math
import tracemalloc

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from invbench.envs.demand import DISTRIBUTIONS, TAIL_MASS, Demand, support_limit
from invbench.envs.errors import BudgetError, SpecError

LIMIT = 100_000
#: a pmf of LIMIT float64 values is 0.8 MB; the builders hold at most a handful of such arrays
PEAK_BYTES = 24 * 8 * LIMIT

KEYS = sorted({k for req, opt, _ in DISTRIBUTIONS.values() for k in req + opt})
scalars = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=0, max_value=50),
    st.floats(min_value=1e-320, max_value=1e-5),
    st.integers(min_value=-10, max_value=10**6),
    st.integers(min_value=-(10**400), max_value=10**400),
    st.booleans(), st.none(), st.text(max_size=5),
)
values = st.one_of(scalars, st.lists(scalars, max_size=8), st.lists(st.lists(scalars, max_size=2), max_size=3),
                   st.dictionaries(st.text(max_size=3), scalars, max_size=2))
names = st.one_of(st.sampled_from(sorted(DISTRIBUTIONS)), st.text(max_size=8), st.lists(st.just("poisson"), max_size=1),
                  st.integers(), st.none())
tables = st.fixed_dictionaries(
    {"distribution": names},
    optional={**{k: values for k in KEYS}, "other": values}).map(
        lambda d: {k: v for k, v in d.items() if not (k == "distribution" and v is None)})
# near-valid tables, so that valid and large-but-refused distributions come up often too
positive = st.one_of(st.floats(min_value=1e-320, max_value=1e12), st.integers(min_value=0, max_value=10**13))
near_valid = st.one_of(
    st.builds(lambda m: {"distribution": "poisson", "mean": m}, positive),
    st.builds(lambda m: {"distribution": "geometric", "mean": m}, positive),
    st.builds(lambda m, v: {"distribution": "negative_binomial", "mean": m, "variance": v}, positive, positive),
    st.builds(lambda n, p: {"distribution": "binomial", "n": n, "p": p}, positive, st.floats(0, 1)),
    st.builds(lambda lo, hi: {"distribution": "uniform", "low": lo, "high": hi}, positive, positive),
    st.builds(lambda m, s: {"distribution": "normal", "mean": m, "std": s}, positive, positive),
    st.builds(lambda m, s: {"distribution": "gamma", "mean": m, "std": s}, positive, positive),
    st.builds(lambda c: {"distribution": "empirical", "counts": c}, st.lists(positive, min_size=1, max_size=6)),
    st.builds(lambda w: {"distribution": "empirical", "pmf": list(np.asarray(w) / sum(w)) if sum(w) > 0 else w},
              st.lists(st.floats(0, 1), min_size=1, max_size=6)),
)


def _check(table: object) -> str:
    """'valid' (and the pmf is sound) or 'refused' (with a one-line error naming a field)."""
    tracemalloc.start()
    try:
        with support_limit(LIMIT):
            demand = Demand.from_dict(table)
            pmf = demand.pmf()
    except (SpecError, BudgetError) as e:
        msg = str(e)
        assert msg.startswith("demand"), msg  # names the field: demand, demand.<key>
        assert "\n" not in msg
        return "refused"
    finally:
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        assert peak <= PEAK_BYTES, (table, peak)
    probs = pmf.probs
    assert probs.ndim == 1 and 2 <= len(probs) <= LIMIT
    assert np.all(np.isfinite(probs)) and np.all(probs >= 0)
    assert abs(probs.sum() + pmf.truncation_mass - 1.0) <= 1e-9
    assert pmf.truncation_mass <= TAIL_MASS + 1e-12
    assert probs[1:].sum() > 0  # not all mass at 0
    assert math.isfinite(demand.mean) and demand.mean > 0
    return "valid"


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tables)
def test_arbitrary_tables_are_valid_or_refused_with_a_field(table):
    assert _check(table) in ("valid", "refused")


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_valid)
def test_near_valid_tables_are_valid_or_refused_with_a_field(table):
    assert _check(table) in ("valid", "refused")


@settings(max_examples=50, deadline=None)
@given(st.one_of(scalars, st.lists(scalars, max_size=3), st.text(max_size=5)))
def test_non_tables_are_refused(value):
    assert _check(value) == "refused"
