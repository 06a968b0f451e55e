"""Choosing a demand law per item (AIC, forced family) and the warnings of `invbench fit`."""
import numpy as np
import pytest
from scipy import stats

from invbench.envs.demand import Demand
from invbench.fitting.reading import ItemHistory
from invbench.fitting.selection import HEAVY_CENSORING, MIN_EXACT_DAYS, fit_item


def history(units, censored=None, missing=0, name="x"):
    units = np.asarray(units)
    c = np.zeros(len(units), bool) if censored is None else np.asarray(censored, bool)
    return ItemHistory(name, np.arange(len(units)), units, c, missing_days=missing)


def test_poisson_data_choose_poisson():
    f = fit_item(history(np.random.default_rng(1).poisson(4.0, 730)))
    assert f.chosen == "poisson"
    assert f.fits["poisson"].aic < f.fits["kaplan_meier"].aic
    assert f.warnings == []


def test_overdispersed_data_choose_negative_binomial():
    x = stats.nbinom(1.5, 1.5 / 5.5).rvs(730, random_state=np.random.default_rng(2))
    f = fit_item(history(x))
    assert f.chosen == "negative_binomial"
    assert f.chosen_fit.variance > 2 * f.chosen_fit.mean


def test_pack_sizes_choose_kaplan_meier():
    rng = np.random.default_rng(3)
    x = np.where(rng.random(730) < 0.3, np.where(rng.random(730) < 0.3, 12, 6), 0)  # 0, 6 or 12 units
    f = fit_item(history(x))
    assert f.chosen == "kaplan_meier"
    # 3 support points -> 2 free probabilities: the parameter count AIC uses
    assert f.fits["kaplan_meier"].n_params == 2
    d = Demand.from_dict(f.chosen_fit.demand)  # the written law is a valid instance demand
    assert np.flatnonzero(d.pmf().probs).tolist() == [0, 6, 12]


def test_aic_is_two_k_minus_two_loglik_and_the_minimum_wins():
    f = fit_item(history(np.random.default_rng(4).poisson(2.0, 300)))
    for fit in f.fits.values():
        if fit.usable:
            assert fit.aic == pytest.approx(2 * fit.n_params - 2 * fit.loglik)
    assert f.chosen_fit.aic == min(x.aic for x in f.fits.values())


def test_forced_family_and_fallback():
    x = np.random.default_rng(5).binomial(8, 0.5, 400)  # variance 2 < mean 4: under-dispersed
    assert fit_item(history(x), family="poisson").chosen == "poisson"
    # the negative binomial tends to the Poisson here and cannot be written: AIC decides
    f = fit_item(history(x), family="negative_binomial")
    assert not f.fits["negative_binomial"].usable
    assert f.chosen == fit_item(history(x)).chosen != "negative_binomial"
    assert "chosen by AIC instead" in f.warnings[0]


def test_heavy_censoring_and_few_days_warn():
    rng = np.random.default_rng(6)
    d = rng.poisson(5.0, 40)
    out = d >= 5
    assert out.mean() > HEAVY_CENSORING and (~out).sum() < MIN_EXACT_DAYS
    f = fit_item(history(np.minimum(d, 5), out))
    text = " ".join(f.warnings)
    assert "heavy censoring" in text and "too few data" in text


def test_missing_days_and_all_zero_sales_warn():
    f = fit_item(history(np.zeros(50, int), missing=3))
    assert f.chosen == "kaplan_meier" and f.chosen_fit.demand["pmf"] == [1.0]
    text = " ".join(f.warnings)
    assert "3 days missing" in text and "all sales are 0" in text


def test_distance_is_to_the_kaplan_meier_curve():
    rng = np.random.default_rng(7)
    d = rng.poisson(5.0, 1000)
    stock = rng.integers(3, 12, 1000)
    f = fit_item(history(np.minimum(d, stock), d >= stock))
    km = np.cumsum(f.fits["kaplan_meier"].demand["pmf"])
    k = np.arange(len(km) - 1)
    want = np.max(np.abs(stats.poisson(f.fits["poisson"].mean).cdf(k) - km[:-1]))
    assert f.distances["poisson"] == pytest.approx(want, abs=1e-12)
    assert f.distances["kaplan_meier"] == 0.0
    assert f.distances["poisson"] < 0.05
