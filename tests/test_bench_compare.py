"""`bench-compare`: cell-by-cell check of a results table against reference results."""
from __future__ import annotations

import math
from pathlib import Path

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.store import compare_results
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, sim_policy, write_suite


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("cmp")
    path = write_suite(tmp / "c.toml", [instance("a"), instance("b", "lost_sales", L=2)],
                       [{"name": "optimum"}, sim_policy("S8", 8)], [0, 1], name="c")
    res = run_bench(load_suite(path), tmp / "out", workers=1, progress=False)
    assert not res.failed
    return tmp / "out"


def _table(run_dir) -> pd.DataFrame:
    return pd.read_csv(run_dir / "results.csv")


def test_identical_results_match(run_dir):
    df = _table(run_dir)
    res = compare_results(df, df.copy())
    assert res.ok and res.compared == len(df) == 6 and not res.differences


def test_exact_cells_are_held_to_the_relative_tolerance(run_dir):
    ref = _table(run_dir)
    i = ref.index[ref["method"] == "exact"][0]
    near, far = ref.copy(), ref.copy()
    near.loc[i, "cost"] *= 1 + 1e-7
    far.loc[i, "cost"] *= 1 + 1e-4
    assert compare_results(near, ref, rtol_exact=2e-6).ok
    res = compare_results(far, ref, rtol_exact=2e-6)
    assert not res.ok and len(res.differences) == 1 and "exact" in res.differences[0]


def test_simulated_cells_are_held_to_the_combined_interval(run_dir):
    # The difference of two independent estimates with 95% half-widths a and b has a 95%
    # half-width sqrt(a^2 + b^2) (common practice: variances of independent estimates add).
    ref = _table(run_dir)
    i = ref.index[ref["method"] == "simulated"][0]
    tol = math.hypot(ref.loc[i, "ci_halfwidth"], ref.loc[i, "ci_halfwidth"])
    inside, outside = ref.copy(), ref.copy()
    inside.loc[i, "cost"] += 0.5 * tol
    outside.loc[i, "cost"] += 2.0 * tol
    assert compare_results(inside, ref).ok
    assert not compare_results(outside, ref).ok


def test_missing_cells_and_changed_method_are_reported(run_dir):
    ref = _table(run_dir)
    fewer = ref.drop(index=ref.index[-1])
    res = compare_results(fewer, ref)
    assert not res.ok and len(res.missing) == 1
    changed = ref.copy()
    j = changed.index[changed["method"] == "simulated"][0]
    changed.loc[j, "method"] = "exact"
    assert any("method" in d for d in compare_results(changed, ref).differences)
    extra = compare_results(ref, fewer)
    assert extra.ok and len(extra.extra) == 1  # cells beyond the reference are only noted


def test_cli_compare_and_update(run_dir, tmp_path, capsys):
    from invbench.cli import main

    ref = tmp_path / "ref.csv"
    assert main(["bench-compare", str(run_dir), str(ref), "--update"]) == 0
    written = pd.read_csv(ref)
    assert "wall_seconds" not in written.columns and len(written) == 6
    assert main(["bench-compare", str(run_dir), str(ref)]) == 0
    assert "6 cells compared, 0 differ, 0 missing -> OK" in capsys.readouterr().out
    written.loc[0, "cost"] += 1.0
    written.to_csv(ref, index=False)
    assert main(["bench-compare", str(run_dir), str(ref)]) == 1
    out = capsys.readouterr().out
    assert "DIFF" in out and "MISMATCH" in out
    assert main(["bench-compare", str(run_dir), str(tmp_path / "none.csv")]) == 2


REFERENCE = Path(__file__).resolve().parent.parent / "experiments" / "reference" / "classic-lost-sales.csv"
# Zipkin (2008), lost sales, Poisson mean 5, h = 1: optimal average cost (from memory).
ZIPKIN_2008 = {1: (4.04, 5.44, 6.68, 7.84), 2: (4.40, 6.09, 7.66, 9.11),
               3: (4.60, 6.53, 8.36, 10.04), 4: (4.73, 6.84, 8.89, 10.79)}


def test_committed_reference_matches_the_suite_and_the_literature():
    ref = pd.read_csv(REFERENCE)
    suite = load_suite("classic-lost-sales")
    wanted = {c.cell_id for c in suite.cells(skip_kinds=("agent",))}
    assert set(ref["cell_id"]) == wanted  # regenerate with `bench-compare --update` after editing the suite
    assert (ref["status"] == "ok").all()
    opt = ref[ref["kind"] == "optimum"]
    for L, row in ZIPKIN_2008.items():
        for p, published in zip((4.0, 9.0, 19.0, 39.0), row):
            got = opt[(opt["lead_time"] == L) & (opt["shortage_cost"] == p)]["cost"].item()
            assert abs(got - published) <= 0.005, (L, p, got, published)
    assert (ref.loc[ref["kind"] != "optimum", "gap"] >= -2e-6).all()
