"""The main job of the robustness stage checked against scipy.stats: regret of the chosen policy
on its own model, and on bootstrap resamples of a Poisson history, for a case with a closed form.

The case: backorders, lead time 0, no fixed cost. Then a base-stock level S is optimal and the cost
per period is the newsvendor cost h E(S - D)+ + p E(D - S)+, minimised by the smallest S with
P(D <= S) >= p / (p + h) (the critical fractile; Zipkin 2000, Foundations of Inventory Management,
ch. 9 — from memory). Every number below that the project computes (its solver, its exact
evaluation) is compared with that formula evaluated with scipy.stats.poisson.
"""
import numpy as np
import pytest
from scipy import stats

from invbench.envs.spec import spec_from_dict
from invbench.fitting.reading import ItemHistory
from invbench.portfolio.alternatives import bootstrap_laws
from invbench.portfolio.items import PortfolioItem
from invbench.portfolio.run import run_portfolio

H, P = 1.0, 9.0


def newsvendor_cost(S: int, lam: float) -> float:
    """h E(S - D)+ + p E(D - S)+ for D ~ Poisson(lam), summed with scipy.stats.poisson."""
    d = np.arange(0, int(stats.poisson.ppf(1 - 1e-15, lam)) + 50)
    pmf = stats.poisson.pmf(d, lam)
    return float(H * np.dot(np.maximum(S - d, 0), pmf) + P * np.dot(np.maximum(d - S, 0), pmf))


def newsvendor_level(lam: float) -> int:
    return int(stats.poisson.ppf(P / (P + H), lam))


def history(lam: float, days: int, seed: int) -> ItemHistory:
    rng = np.random.default_rng(seed)
    units = rng.poisson(lam, size=days)
    return ItemHistory("part", np.arange(days), units, np.zeros(days, dtype=bool))


def item(lam: float) -> PortfolioItem:
    spec = spec_from_dict({"name": "part", "model": "backorder", "lead_time": 0, "holding_cost": H,
                           "shortage_cost": P, "demand": {"distribution": "poisson", "mean": lam}})
    return PortfolioItem("part", spec, "test")


def test_bootstrap_means_follow_the_normal_approximation():
    # Bootstrap distribution of the mean of n days: approximately normal with the sample mean and
    # sd s / sqrt(n), s the plug-in sd (Efron & Tibshirani 1993, ch. 5 — from memory); checked with
    # scipy.stats.kstest. The Poisson MLE of an uncensored resample is its mean.
    h = history(4.0, 400, seed=1)
    lam = float(h.units.mean())
    laws = bootstrap_laws(item(lam).spec, "part", h, replicates=300, seed=0)
    means = np.array([law["mean"] for _, law, _ in laws])
    assert len(means) == 300 and all(law["distribution"] == "poisson" for _, law, _ in laws)
    sd = h.units.std(ddof=0) / np.sqrt(len(h.units))
    assert stats.kstest(means, stats.norm(lam, sd).cdf).pvalue > 1e-3
    # seeded: the same item gets the same resamples again
    again = bootstrap_laws(item(lam).spec, "part", h, replicates=300, seed=0)
    assert [law for _, law, _ in again] == [law for _, law, _ in laws]


@pytest.mark.slow
def test_regret_on_own_model_is_zero_and_bootstrap_regret_matches_scipy(tmp_path):
    h = history(4.0, 200, seed=7)
    lam_a = float(h.units.mean())
    res = run_portfolio([item(lam_a)], tmp_path / "run", histories={"part": h}, name="t", policies=["base_stock"],
                        kinds=("bootstrap",), replicates=6, workers=1, progress=False)
    row = res.choice.iloc[0]
    s_a = newsvendor_level(lam_a)
    # the chosen policy on its own model: the optimum, so its gap is 0 (up to the solver's 1e-6)
    assert row["policy"] == "base_stock" and int(row["param_S"]) == s_a
    assert row["optimum"] == pytest.approx(newsvendor_cost(s_a, lam_a), rel=1e-6)
    assert abs(row["gap"]) < 2e-6
    rb = res.robustness
    assert len(rb) == 6 and (rb["status"] == "ok").all()
    for r in rb.itertuples():
        lam_b = r.mean_b
        # B's optimum and the regret of S_A under B, as scipy.stats computes them
        opt_b = newsvendor_cost(newsvendor_level(lam_b), lam_b)
        assert r.optimum_b == pytest.approx(opt_b, rel=1e-6)
        assert r.cost_b == pytest.approx(newsvendor_cost(s_a, lam_b), rel=1e-6)
        expected = newsvendor_cost(s_a, lam_b) - opt_b
        assert r.regret == pytest.approx(expected, abs=1e-6 * opt_b)
        assert r.regret >= -1e-6 * opt_b
    # a resample whose critical-fractile level is S_A has no regret; one whose level differs has some
    same = [newsvendor_level(lb) == s_a for lb in rb["mean_b"]]
    assert any(same) and not all(same)  # this history's resamples give both cases
    assert all((abs(g) < 1e-6) == s for g, s in zip(rb["regret_rel"], same))
