"""The serial chain's decomposition against outside references.

* Shang & Song (2003), Management Science 49(5), abstract: their heuristic (the average of the
  newsvendor bounds) is within 1.5 % of the optimum, 0.24 % on average, on their test bed.
  Their test bed is not reproduced here; the grid below is our own in its spirit (from memory:
  echelon holding costs summing to 1 at stage 1, penalty 9 to 99, Poisson demand).
* No worked numerical example of the two-stage recursion was found with the search tool, so
  two closed-form special cases are checked instead, computed with scipy.stats:
  - stage 1's optimal echelon level is the critical-fractile level of demand over L_1 + 1
    periods for the ratio (b + h_2) / (b + h_1) (Clark & Scarf 1960; the two Shang & Song
    bounds coincide at stage 1) — from memory;
  - with equal holding costs at both stages nothing is gained by holding stock upstream, so the
    chain costs the single-stage newsvendor cost over L_1 + L_2 + 1 periods plus h L_1 mu for
    stock in transit to stage 1 (Little's law) — the classical newsvendor cost, common practice.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from invbench.baselines import clark_scarf as cs
from invbench.envs.spec import spec_from_dict

SHAPES = {"equal": lambda n: [1.0] * n, "down": lambda n: [float(n - j) for j in range(n)],
          "up": lambda n: [float(j + 1) for j in range(n)],
          "jump_down": lambda n: [float(n)] + [1.0] * (n - 1),
          "jump_up": lambda n: [1.0] * (n - 1) + [float(n)]}


def serial(L, h, b, mean):
    return spec_from_dict({"model": "serial", "lead_times": list(L), "holding_costs": list(h),
                           "shortage_cost": b, "demand": {"distribution": "poisson", "mean": mean}})


def test_shang_song_heuristic_error_on_our_grid_is_within_the_published_range():
    errors = []
    for n in (2, 3, 4):
        for shape in SHAPES.values():
            e = np.array(shape(n))
            e = e / e.sum()
            h = [float(e[j:].sum()) for j in range(n)]  # installation costs; h_1 = 1
            for b in (9.0, 39.0, 99.0):
                for L in ([1] * n, [2] * n, [4] + [1] * (n - 1), [1] * (n - 1) + [4]):
                    for mean in (5.0, 16.0):
                        spec = serial(L, h, b, mean)
                        opt = cs.optimal_levels(spec)
                        lo, hi = cs.newsvendor_bounds(spec)
                        # the bounds bracket the optimal levels (Shang & Song 2003)
                        assert all(a <= s <= c for a, s, c in zip(lo, opt.levels, hi)), (L, h, b, mean)
                        heur = cs.echelon_cost(spec, cs.shang_song_levels(spec))
                        errors.append((heur.cost - opt.cost) / opt.cost)
    errors = np.array(errors)
    assert len(errors) == 360 and errors.min() >= -1e-12
    # Shang & Song (2003): maximum error below 1.5 %, average 0.24 %
    assert errors.max() < 0.015, errors.max()
    assert errors.mean() < 0.0024 * 1.5, errors.mean()


@pytest.mark.parametrize("L1,L2,h1,h2,b,mean", [(1, 1, 2.0, 1.0, 9.0, 5.0), (2, 1, 1.0, 0.5, 19.0, 4.0),
                                                (0, 3, 3.0, 1.0, 39.0, 6.0), (3, 2, 1.5, 1.4, 4.0, 3.0)])
def test_stage_one_level_is_the_critical_fractile(L1, L2, h1, h2, b, mean):
    spec = serial([L1, L2], [h1, h2], b, mean)
    ratio = (b + h2) / (b + h1)
    # scipy's Poisson quantile of demand over L1 + 1 periods
    expected = int(stats.poisson.ppf(ratio, mean * (L1 + 1)))
    assert cs.optimal_levels(spec).levels[0] == expected
    assert cs.newsvendor_bounds(spec)[0][0] == cs.newsvendor_bounds(spec)[1][0] == expected


@pytest.mark.parametrize("L1,L2,h,b,mean", [(1, 1, 1.0, 9.0, 5.0), (2, 3, 0.5, 19.0, 3.0), (0, 2, 2.0, 4.0, 4.0)])
def test_equal_holding_costs_reduce_to_one_stage(L1, L2, h, b, mean):
    spec = serial([L1, L2], [h, h], b, mean)
    lam = mean * (L1 + L2 + 1)
    k = np.arange(0, int(stats.poisson.ppf(1 - 1e-15, lam)) + 50)
    pk = stats.poisson.pmf(k, lam)

    def newsvendor(y):  # h E(y - D)^+ + b E(D - y)^+, D ~ Poisson(lam), by scipy.stats
        return float(np.sum(pk * (h * np.maximum(y - k, 0) + b * np.maximum(k - y, 0))))

    best = min(newsvendor(y) for y in range(0, int(4 * lam) + 20))
    expected = best + h * L1 * mean
    got = cs.optimal_levels(spec)
    assert got.cost == pytest.approx(expected, rel=1e-8)
    assert got.parts["in_transit"] == pytest.approx(h * L1 * mean, rel=1e-9)
