"""Suite files: packaged suites load and expand as described, bad input gives one-line errors."""
from __future__ import annotations

import itertools

import pytest

from invbench.envs.errors import SpecError
from invbench.experiments.suite import load_suite, packaged_suites, suite_from_dict


def test_packaged_suites_are_there():
    assert {"quick", "classic-lost-sales", "backorder-fixed-cost", "lead-time-sweep"} <= set(packaged_suites())


def test_classic_lost_sales_is_the_literature_grid():
    # Zipkin (2008), "Old and new methods for lost-sales inventory systems" (from memory):
    # Poisson demand mean 5, h = 1, L = 1..4, p = 4, 9, 19, 39 -- 16 instances.
    s = load_suite("classic-lost-sales")
    got = {(i.lead_time, i.shortage_cost) for i in s.instances}
    assert got == set(itertools.product([1, 2, 3, 4], [4.0, 9.0, 19.0, 39.0]))
    for i in s.instances:
        assert i.model == "lost_sales" and i.holding_cost == 1.0
        assert i.demand.distribution == "poisson" and i.demand.params["mean"] == 5.0
    assert {i.label for i in s.instances} >= {"ls-L1-p4", "ls-L4-p39"}
    assert s.sweep == "lead_time"


def test_lead_time_sweep_and_backorder_grid():
    sweep = load_suite("lead-time-sweep")
    assert [i.lead_time for i in sweep.instances] == list(range(7))
    assert len({(i.demand.params["mean"], i.shortage_cost) for i in sweep.instances}) == 1
    bo = load_suite("backorder-fixed-cost")
    assert all(i.model == "backorder" and i.fixed_order_cost > 0 for i in bo.instances)
    assert len({i.demand.params["mean"] for i in bo.instances}) >= 2
    assert len({i.fixed_order_cost for i in bo.instances}) >= 2
    assert "s_S" in {p.name for p in bo.policies}


def test_quick_suite_has_everything_the_demo_needs():
    from invbench.baselines.policies.registry import policy_names, supports

    s = load_suite("quick")
    assert s.invented and len(s.instances) == 3
    names = {p.name for p in s.policies if p.kind == "classical"}
    # every classical policy defined for a model the demo's instances use
    assert names == {n for n in policy_names() if any(supports(n, i.model) for i in s.instances)}
    kinds = {p.kind for p in s.policies}
    assert {"optimum", "agent"} <= kinds
    assert any(p.agent == "ppo" for p in s.policies)


def _base(**over):
    d = {"suite": {"name": "x"},
         "instances": [{"name": "i", "model": "backorder", "demand": {"distribution": "poisson", "mean": 3}}],
         "policies": [{"name": "optimum"}, {"name": "base_stock"}]}
    d.update(over)
    return d


def test_cells_ids_are_stable_and_content_addressed():
    a = suite_from_dict(_base())
    b = suite_from_dict(_base())
    assert [c.cell_id for c in a.cells()] == [c.cell_id for c in b.cells()]
    relabelled = _base(policies=[{"name": "optimum"}, {"name": "base_stock", "label": "bs"}])
    assert [c.cell_id for c in suite_from_dict(relabelled).cells()] == [c.cell_id for c in a.cells()]
    other = _base(policies=[{"name": "optimum"}, {"name": "base_stock", "params": {"S": 5}}])
    assert suite_from_dict(other).cells()[1].cell_id != a.cells()[1].cell_id
    assert a.cells()[0].policy.kind == "optimum"  # optimum cells come first


def test_optimum_runs_once_and_seeds_multiply_other_cells():
    d = _base()
    d["suite"]["seeds"] = [0, 1, 2]
    cells = suite_from_dict(d).cells()
    assert [c.policy.kind for c in cells].count("optimum") == 1
    assert sorted(c.seed for c in cells if c.policy.kind == "classical") == [0, 1, 2]



def test_a_stopped_run_has_every_policys_first_seed_first():
    # after the optimum the seed is the outer loop: the first seed of every policy on every
    # instance comes before any second seed, so a partial run compares all policies
    d = _base(instances=[{"name": f"i{k}", "model": "backorder", "demand": {"distribution": "poisson",
                                                                        "mean": 3 + k}} for k in range(3)],
              policies=[{"name": "optimum"}, {"name": "base_stock"}, {"name": "s_S"}])
    d["suite"]["seeds"] = [5, 6]
    cells = suite_from_dict(d).cells()
    got = [(c.policy.name, c.seed, c.instance.label) for c in cells]
    assert [(g[0], g[2]) for g in got[:3]] == [("optimum", f"i{k}") for k in range(3)]
    expected = [(p, s, f"i{k}") for s in (5, 6) for p in ("base_stock", "s_S") for k in range(3)]
    assert got[3:] == expected

def test_vary_expands_nested_fields_and_names():
    inst = {"name": "m{demand.mean}-K{fixed_order_cost}", "model": "backorder", "fixed_order_cost": 1.0,
            "demand": {"distribution": "poisson", "mean": 3.0},
            "vary": {"demand.mean": [3.0, 6.5], "fixed_order_cost": [10.0, 20.0]}}
    s = suite_from_dict(_base(instances=[inst]))
    assert [i.label for i in s.instances] == ["m3-K10", "m3-K20", "m6.5-K10", "m6.5-K20"]
    assert s.instances[2].demand.params["mean"] == 6.5


def test_instance_from_file(tmp_path):
    (tmp_path / "inst.toml").write_text(
        '[instance]\nname = "f"\nmodel = "lost_sales"\nlead_time = 2\n[instance.demand]\n'
        'distribution = "poisson"\nmean = 4.0\n')
    s = suite_from_dict(_base(instances=[{"file": "inst.toml", "shortage_cost": 19.0}]), base_dir=tmp_path)
    assert s.instances[0].lead_time == 2 and s.instances[0].shortage_cost == 19.0
    assert suite_from_dict(s.to_dict()).instances == s.instances  # the stored suite round-trips


@pytest.mark.parametrize("change, field", [
    ({"suite": {}}, "suite.name"),
    ({"suite": {"name": "x", "colour": 1}}, "suite.colour"),
    ({"suite": {"name": "x", "seeds": [1, 1]}}, "suite.seeds"),
    ({"suite": {"name": "x", "seeds": [-1]}}, "suite.seeds"),
    ({"evaluation": {"method": "guess"}}, "evaluation.method"),
    ({"evaluation": {"replications": 0}}, "evaluation.replications"),
    ({"instances": []}, "instances"),
    ({"instances": [{"name": "i", "model": "backorder", "lead_time": -1,
                     "demand": {"distribution": "poisson", "mean": 3}}]}, "instances[0]: instance.lead_time"),
    ({"policies": [{"name": "no_such_policy"}]}, "policies[0].name"),
    ({"policies": [{"agent": "ppo"}]}, "policies[0].steps"),
    ({"policies": [{"agent": "ppo", "steps": 0}]}, "policies[0].steps"),
    ({"policies": [{"function": "nocolon"}]}, "policies[0].function"),
    ({"policies": [{"name": "base_stock"}, {"name": "base_stock"}]}, "policies: label"),
    ({"policies": [{"name": "base_stock", "models": ["retail"]}]}, "policies[0].models"),
    ({"extra": 1}, "extra"),
    # checked when loaded, not when the cell runs (formerly a failing cell)
    ({"policies": [{"agent": "no-such-agent", "steps": 10}]}, "policies[0].agent: must be one of"),
    ({"policies": [{"agent": "ppo", "steps": 10, "settings": {"learning_rate": -1.0}}]},
     "policies[0].settings.learning_rate: must be"),
    ({"policies": [{"agent": "ppo", "steps": 10, "settings": {"colour": 1}}]}, "policies[0].settings.colour"),
    ({"policies": [{"agent": "ppo", "steps": 10, "cpu_seconds": float("nan")}]}, "policies[0].cpu_seconds"),
    ({"policies": [{"name": "base_stock", "params": {"S": -3}}]}, "policies[0].params.S: must be"),
    ({"policies": [{"name": "base_stock", "params": {"level": 3}}]}, "policies[0].params.level: unknown"),
    ({"policies": [{"name": "s_S", "params": {"s": "low", "S": 9}}]}, "policies[0].params.s: must be"),
    ({"policies": [{"name": "base_stock", "settings": {"a": 1}}]}, "policies[0].settings: unknown key"),
    ({"evaluation": {"replications": 1}}, "evaluation.replications: must be an integer in [2,"),
    ({"suite": {"name": ".."}}, "suite.name"),
    ({"suite": {"name": "a b"}}, "suite.name"),
    ({"suite": {"name": "x", "seeds": [2**40]}}, "suite.seeds"),
])
def test_bad_suites_name_the_field(change, field):
    with pytest.raises(SpecError) as e:
        suite_from_dict(_base(**change))
    msg = str(e.value)
    assert msg.startswith(field) and "\n" not in msg, msg


def test_bad_suite_through_the_cli_is_one_line_exit_2(tmp_path, capsys):
    from invbench.cli import main

    bad = tmp_path / "bad.toml"
    bad.write_text('[suite]\nname = "x"\n[evaluation]\nmethod = "guess"\n')
    assert main(["bench", str(bad), "--out", str(tmp_path / "o")]) == 2
    assert main(["bench", "no-such-suite"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and err[0].startswith("invbench: error: evaluation.method")
    assert "packaged:" in err[1] and "quick" in err[1]


def test_list_shows_the_packaged_suites(capsys):
    from invbench.cli import main

    assert main(["bench", "--list"]) == 0
    out = capsys.readouterr().out
    for name in packaged_suites():
        assert name in out
