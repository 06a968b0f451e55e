"""Demand distributions against scipy.stats: exact face (pmf, mean, variance), sampled face
(chi-square goodness of fit) and convolution (sum of Poissons is Poisson)."""
import numpy as np
import pytest
from scipy import stats

from invbench.envs.demand import TAIL_MASS, Demand

CASES = [
    ({"distribution": "poisson", "mean": 5.0}, stats.poisson(5.0)),
    ({"distribution": "negative_binomial", "mean": 4.0, "variance": 10.0}, stats.nbinom(4.0 ** 2 / 6.0, 0.4)),
    ({"distribution": "geometric", "mean": 3.0}, stats.geom(0.25, loc=-1)),
    ({"distribution": "binomial", "n": 12, "p": 0.3}, stats.binom(12, 0.3)),
    ({"distribution": "uniform", "low": 2, "high": 9}, stats.randint(2, 10)),
]


@pytest.mark.parametrize("params,ref", CASES, ids=[c[0]["distribution"] for c in CASES])
def test_exact_face_matches_scipy(params, ref):
    d = Demand.from_dict(params)
    pmf = d.pmf()
    k = np.arange(len(pmf.probs))
    np.testing.assert_allclose(pmf.probs, ref.pmf(k), rtol=1e-9, atol=1e-15)
    assert pmf.truncation_mass <= TAIL_MASS
    assert abs(pmf.probs.sum() - (1 - pmf.truncation_mass)) <= 1e-12
    assert abs(d.mean - ref.mean()) <= 1e-6 * max(1, ref.mean())
    assert abs(d.var - ref.var()) <= 1e-5 * max(1, ref.var())


@pytest.mark.parametrize("params,ref", CASES, ids=[c[0]["distribution"] for c in CASES])
def test_sampled_face_agrees_with_exact_face(params, ref):
    d = Demand.from_dict(params)
    x = d.sample(np.random.default_rng(123), 200_000)
    support = np.arange(len(d.pmf().probs))
    expected = ref.pmf(support) * len(x)
    keep = expected >= 20  # pool the thin tail (chi-square rule of thumb, common practice)
    obs = np.bincount(x, minlength=len(support))[: len(support)]
    f_obs = np.append(obs[keep], obs[~keep].sum())
    f_exp = np.append(expected[keep], expected[~keep].sum())
    f_exp *= f_obs.sum() / f_exp.sum()
    nonzero = f_exp > 0
    p = stats.chisquare(f_obs[nonzero], f_exp[nonzero]).pvalue
    assert p > 1e-4


def test_discretised_normal_and_gamma_round_to_nearest_integer():
    # P(D = k) = P(k - 0.5 < X <= k + 0.5), P(D = 0) = P(X <= 0.5): computed with scipy.stats.
    for params, ref in [({"distribution": "normal", "mean": 8.0, "std": 2.5}, stats.norm(8.0, 2.5)),
                        ({"distribution": "gamma", "mean": 6.0, "std": 3.0}, stats.gamma(4.0, scale=1.5))]:
        pmf = Demand.from_dict(params).pmf().probs
        k = np.arange(len(pmf))
        expect = ref.cdf(k + 0.5) - np.where(k == 0, 0.0, ref.cdf(k - 0.5))
        np.testing.assert_allclose(pmf, expect, atol=1e-14)


def test_empirical_from_counts_and_from_pmf():
    d = Demand.from_dict({"distribution": "empirical", "counts": [0, 2, 2, 3, 3, 3]})
    np.testing.assert_allclose(d.pmf().probs, [1 / 6, 0, 2 / 6, 3 / 6])
    e = Demand.from_dict({"distribution": "empirical", "pmf": [0.2, 0.5, 0.3]})
    assert abs(e.mean - 1.1) < 1e-12


def test_convolution_of_poissons_is_poisson():
    # Sum of n iid Poisson(m) is Poisson(n m): reference scipy.stats.poisson.
    d = Demand.from_dict({"distribution": "poisson", "mean": 3.5})
    for n in (1, 2, 5):
        pmf = d.lead_time_pmf(n)
        k = np.arange(len(pmf.probs))
        # each factor dropped <= TAIL_MASS of its tail, so entries may differ by about that much
        np.testing.assert_allclose(pmf.probs, stats.poisson.pmf(k, n * 3.5), atol=n * TAIL_MASS)
        assert pmf.truncation_mass <= n * TAIL_MASS + 1e-12


def test_common_random_numbers_give_the_same_demand():
    d = Demand.from_dict({"distribution": "negative_binomial", "mean": 4.0, "variance": 9.0})
    a = d.sample(np.random.default_rng(7), 1000)
    b = d.sample(np.random.default_rng(7), 1000)
    assert np.array_equal(a, b)


def test_large_mean_pmf_and_dropped_tail_match_scipy():
    # Reference: scipy.stats.poisson. The dropped tail is the tail itself (P(D > last kept)),
    # not 1 - sum(kept), whose round-off over ~25,000 terms once exceeded TAIL_MASS.
    mean = 24_351.0
    pmf = Demand.from_dict({"distribution": "poisson", "mean": mean}).pmf()
    k = np.arange(len(pmf.probs))
    np.testing.assert_allclose(pmf.probs, stats.poisson.pmf(k, mean), rtol=1e-9, atol=1e-15)
    assert pmf.truncation_mass <= TAIL_MASS
    assert pmf.truncation_mass == pytest.approx(stats.poisson.sf(len(pmf.probs) - 1, mean), rel=1e-6)


def test_fft_convolution_of_large_poissons_is_poisson():
    # Above a few million multiply-adds the convolution goes through the FFT; reference:
    # scipy.stats.poisson (a sum of independent Poissons is Poisson with the summed mean).
    d = Demand.from_dict({"distribution": "poisson", "mean": 3000.0})
    assert len(d.pmf().probs) ** 2 > 4_000_000  # the FFT path is the one under test
    pmf = d.lead_time_pmf(2)
    k = np.arange(len(pmf.probs))
    # each factor dropped <= TAIL_MASS of its tail, as in the direct-convolution test above
    np.testing.assert_allclose(pmf.probs, stats.poisson.pmf(k, 6000.0), atol=2 * TAIL_MASS)
    direct = np.convolve(d.pmf().probs, d.pmf().probs)[: len(pmf.probs)]
    np.testing.assert_allclose(pmf.probs, direct, atol=1e-15)  # the FFT adds only round-off
    # dropped: the two factors' tails plus the sum's own truncation, each at most TAIL_MASS
    assert pmf.truncation_mass <= 3 * TAIL_MASS
    assert abs(pmf.probs.sum() + pmf.truncation_mass - 1) <= 1e-11  # round-off of ~3,000 scipy pmf terms


def test_gamma_with_extreme_but_valid_ratio_matches_scipy():
    # shape (mean/std)^2 = 1e4 computed without overflow; reference scipy.stats.gamma rounded.
    pmf = Demand.from_dict({"distribution": "gamma", "mean": 50.0, "std": 0.5}).pmf().probs
    ref = stats.gamma(1e4, scale=0.005)
    k = np.arange(len(pmf))
    expect = ref.cdf(k + 0.5) - np.where(k == 0, 0.0, ref.cdf(k - 0.5))
    np.testing.assert_allclose(pmf, expect, atol=1e-14)
