"""The demand estimators of `invbench fit` against outside references: scipy's own estimators
and functions on uncensored data, the Kaplan–Meier product-limit formula, and simulations in
which the truth is known and the naive mean of the sales is biased by stock-outs."""
import math

import numpy as np
import pytest
from scipy import optimize, stats

from invbench.fitting.estimators import Sample, fit_kaplan_meier, fit_negative_binomial, fit_poisson
from invbench.fitting.reading import ItemHistory
from invbench.fitting.selection import fit_item


def uncensored(x):
    return Sample.from_days(np.asarray(x), np.zeros(len(x), dtype=bool))


@pytest.mark.parametrize("mean,seed", [(0.7, 0), (4.0, 1), (25.0, 2)])
def test_poisson_mle_is_the_sample_mean(mean, seed):
    x = np.random.default_rng(seed).poisson(mean, 500)
    fit = fit_poisson(uncensored(x))
    # Poisson MLE = sample mean (the score equation sum(x)/mu - n = 0; from memory, textbook result)
    assert fit.mean == pytest.approx(x.mean(), rel=1e-8)
    # log-likelihood equals scipy.stats.poisson's at the sample mean
    assert fit.loglik == pytest.approx(stats.poisson.logpmf(x, x.mean()).sum(), rel=1e-10)
    # scipy.stats.fit (scipy's own generic MLE, differential evolution) lands on the same mean
    ref = stats.fit(stats.poisson, x, bounds={"mu": (0.01, 100.0)})
    assert fit.mean == pytest.approx(ref.params.mu, rel=1e-3)
    assert fit.loglik >= -ref.nllf() - 1e-9


@pytest.mark.parametrize("mean,var,seed", [(4.8, 16.0, 0), (1.2, 2.5, 3), (10.0, 40.0, 4)])
def test_negative_binomial_mle_matches_scipy(mean, var, seed):
    size = mean * mean / (var - mean)
    x = stats.nbinom(size, size / (size + mean)).rvs(800, random_state=np.random.default_rng(seed))
    fit = fit_negative_binomial(uncensored(x))
    assert fit.usable

    # reference 1: scipy.optimize on the plain likelihood of scipy.stats.nbinom in its own (n, p)
    def nll(t):
        return -stats.nbinom.logpmf(x, math.exp(t[0]), 1 / (1 + math.exp(-t[1]))).sum()
    ref = optimize.minimize(nll, [0.0, 0.0], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20_000, "maxfev": 20_000})
    n_ref, p_ref = math.exp(ref.x[0]), 1 / (1 + math.exp(-ref.x[1]))
    mean_ref = n_ref * (1 - p_ref) / p_ref
    var_ref = mean_ref / p_ref
    assert fit.loglik == pytest.approx(-ref.fun, abs=1e-6)
    assert fit.mean == pytest.approx(mean_ref, rel=1e-5)
    assert fit.variance == pytest.approx(var_ref, rel=1e-3)
    # the NB MLE of the mean is the sample mean (score equation in the mean; from memory)
    assert fit.mean == pytest.approx(x.mean(), rel=1e-7)
    # reference 2: scipy.stats.fit; it searches integer n only, so its optimum can only be worse
    sf = stats.fit(stats.nbinom, x, bounds={"n": (0.1, 100.0), "p": (0.001, 0.999)})
    assert fit.loglik >= -sf.nllf() - 1e-9


def test_kaplan_meier_without_censoring_is_the_empirical_distribution():
    x = np.random.default_rng(5).negative_binomial(3, 0.4, 600)
    km = fit_kaplan_meier(uncensored(x))
    k = np.arange(x.max() + 1)
    # scipy.stats.ecdf on the plain sample is the empirical CDF
    np.testing.assert_allclose(np.cumsum(km.demand["pmf"]), stats.ecdf(x).cdf.evaluate(k), atol=1e-12)
    np.testing.assert_allclose(km.demand["pmf"], np.bincount(x) / len(x), atol=1e-12)
    assert km.tail_mass == 0.0
    assert km.n_params == np.count_nonzero(np.bincount(x)) - 1


def product_limit_sf(sales, stockout, kmax):
    """Kaplan & Meier (1958) product-limit estimate, written out for discrete demand: a day with
    a stock-out and sales x says D >= x, i.e. D > x - 1, so it is at risk at 0..x-1 only."""
    sf, s = [], 1.0
    for k in range(kmax + 1):
        d = np.sum((sales == k) & ~stockout)
        n = np.sum((sales >= k) & ~stockout) + np.sum((sales > k) & stockout)
        s *= 1 - d / n if n else 1.0
        sf.append(s)
    return np.array(sf)


def test_kaplan_meier_with_censoring_matches_the_product_limit_formula():
    rng = np.random.default_rng(6)
    demand = rng.poisson(5.0, 400)
    stock = rng.integers(2, 12, 400)
    sales, out = np.minimum(demand, stock), demand >= stock
    km = fit_kaplan_meier(Sample.from_days(sales, out))
    ref = product_limit_sf(sales, out, sales.max())
    pmf = np.asarray(km.demand["pmf"])
    got_sf = 1 - np.cumsum(pmf)
    np.testing.assert_allclose(got_sf[:-1], ref[:-1], atol=1e-12)
    # what the estimator leaves above the largest value is put at that value and reported
    assert km.tail_mass == pytest.approx(ref[-1], abs=1e-12)
    assert pmf.sum() == pytest.approx(1.0, abs=1e-12)


def test_censored_largest_value_moves_the_tail_and_warns():
    sales = np.array([0, 1, 1, 2, 3, 3, 4, 4])
    out = np.array([0, 0, 0, 0, 0, 1, 1, 1], dtype=bool)  # every day at the top is a stock-out
    km = fit_kaplan_meier(Sample.from_days(sales, out))
    ref = product_limit_sf(sales, out, 4)
    assert km.tail_mass == pytest.approx(ref[-1]) and ref[-1] > 0
    assert km.demand["pmf"][-1] == pytest.approx(ref[-2])  # all of P(D >= 4) sits at 4
    h = ItemHistory("x", np.arange(8), sales, out)
    f = fit_item(h, family="kaplan_meier")
    assert any("P(D > 4)" in w for w in f.warnings), f.warnings


def simulate_stockouts(law, n, stock, seed):
    rng = np.random.default_rng(seed)
    demand = law.rvs(n, random_state=rng)
    return np.minimum(demand, stock), demand >= stock


def test_censored_poisson_recovers_the_truth_where_the_naive_mean_is_biased():
    truth, stock, n = 6.0, 6, 3000
    sales, out = simulate_stockouts(stats.poisson(truth), n, stock, seed=7)
    # naive mean of sales estimates E[min(D, 6)] = sum_{k<6} P(D > k) = 5.036 (scipy.stats.poisson),
    # a bias of -0.96 (-16 %); it does, within 3 standard errors
    naive_target = sum(stats.poisson(truth).sf(k) for k in range(stock))
    assert naive_target == pytest.approx(5.036, abs=1e-3)
    assert abs(sales.mean() - naive_target) < 3 * sales.std() / math.sqrt(n)
    fit = fit_poisson(Sample.from_days(sales, out))
    # the censored MLE is within 3 % of the truth: about 4 standard errors (0.7 %, the spread of
    # the estimate over 60 other seeds of this set-up)
    assert out.mean() == pytest.approx(0.55, abs=0.03)
    assert abs(fit.mean - truth) / truth < 0.03


def test_censored_negative_binomial_recovers_mean_and_variance():
    mean, var, stock, n = 5.0, 15.0, 8, 4000
    size = mean * mean / (var - mean)
    law = stats.nbinom(size, size / (size + mean))
    sales, out = simulate_stockouts(law, n, stock, seed=8)
    naive_target = sum(law.sf(k) for k in range(stock))  # E[min(D, 8)] = 4.380 (scipy.stats.nbinom)
    assert naive_target == pytest.approx(4.380, abs=1e-3)  # naive mean biased by -12 %
    fit = fit_negative_binomial(Sample.from_days(sales, out))
    # tolerances are about 3 standard errors (1.6 % for the mean, 4.8 % for the variance: the
    # spread of the estimates over 40 other seeds of this set-up)
    assert abs(fit.mean - mean) / mean < 0.05
    assert abs(fit.variance - var) / var < 0.15


def test_kaplan_meier_recovers_the_truth_under_random_stock_levels():
    truth = stats.poisson(6.0)
    rng = np.random.default_rng(9)
    demand = truth.rvs(4000, random_state=rng)
    stock = rng.integers(3, 20, 4000)  # independent censoring that reaches above almost all demand
    sales, out = np.minimum(demand, stock), demand >= stock
    assert abs(sales.mean() - 6.0) > 0.4  # naive mean biased by more than 0.4 units
    km = fit_kaplan_meier(Sample.from_days(sales, out))
    k = np.arange(len(km.demand["pmf"]))
    # Kolmogorov distance to the true CDF; 1.36/sqrt(n) is the 5 % critical value for n uncensored
    # observations (Kolmogorov's limit law), and censoring loses information, so allow 2x that
    dist = np.max(np.abs(np.cumsum(km.demand["pmf"]) - truth.cdf(k)))
    assert dist < 2 * 1.36 / math.sqrt(4000)
    assert km.mean == pytest.approx(6.0, rel=0.03)
