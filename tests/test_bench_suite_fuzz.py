"""Property: the suite loader answers any dict with a valid suite or the project's own one-line
error naming a field (SpecError / BudgetError) -- never another exception.

The dicts are built (hypothesis) from near-valid pieces mixed with arbitrary values at every
level, so that the checks deep inside (instances, vary grids, policy parameters through the
registry, agent settings through the agents' validation, evaluation settings) are reached.
"""
from __future__ import annotations

import re
import tomllib

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from invbench.envs.errors import BudgetError, SpecError
from invbench.experiments.suite import suite_from_dict

WORDS = ["optimum", "base_stock", "s_S", "constant_order", "capped_base_stock", "pil", "myopic", "ppo",
         "a2c", "dqn", "rollout", "poisson", "geometric", "lost_sales", "backorder", "auto", "exact",
         "simulate", "lead_time", "demand.mean", "L{lead_time}", "..", ".", "x/y", "", "a b", "tests:x",
         "classical", "agent", "custom", "tests.test_bench_helpers:sim_base_stock"]
KEYS = ["suite", "name", "description", "seeds", "sweep", "invented", "evaluation", "method",
        "replications", "periods", "warmup", "instances", "policies", "kind", "label", "params",
        "agent", "steps", "settings", "function", "models", "cpu_seconds", "file", "vary", "model",
        "lead_time", "holding_cost", "shortage_cost", "demand", "distribution", "mean", "S", "s", "r",
        "target", "learning_rate", "hidden", "n_envs", "threads", "max_order", "case_pack"]

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-(2**70), max_value=2**70), st.integers(-3, 12),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=8), st.sampled_from(WORDS))
keys = st.one_of(st.sampled_from(KEYS), st.text(max_size=6))
anything = st.recursive(scalars, lambda c: st.lists(c, max_size=3) | st.dictionaries(keys, c, max_size=4),
                        max_leaves=8)


def maybe(good: st.SearchStrategy) -> st.SearchStrategy:
    """Mostly (31 in 32) the near-valid value, sometimes anything at all."""
    return st.integers(0, 31).flatmap(lambda i: anything if i == 0 else good)


def table(required: dict, optional: dict) -> st.SearchStrategy:
    """A table of near-valid values; rarely with one stray key (any name, any value) added."""
    base = st.fixed_dictionaries({k: maybe(v) for k, v in required.items()},
                                 optional={k: maybe(v) for k, v in optional.items()})
    stray = st.tuples(base, keys, anything).map(lambda t: {**t[0], t[1]: t[2]})
    return st.integers(0, 15).flatmap(lambda i: stray if i == 0 else base)


demand = table({"distribution": st.sampled_from(["poisson", "geometric"]), "mean": st.floats(0.1, 8.0)}, {})
instance = table(
    {"name": st.sampled_from(["a", "b", "c{lead_time}", "m{demand.mean}-p{shortage_cost}", "L{lead_time}"]), "model": st.sampled_from(["lost_sales", "backorder"]),
     "demand": demand},
    {"lead_time": st.integers(0, 3), "shortage_cost": st.floats(0.5, 20.0), "holding_cost": st.just(1.0),
     "vary": st.dictionaries(st.sampled_from(["lead_time", "demand.mean", "shortage_cost"]),
                             st.lists(st.integers(1, 3), min_size=1, max_size=3), max_size=2)})
params = st.dictionaries(st.sampled_from(["S", "s", "r", "target", "level"]),
                         st.one_of(st.integers(-2, 30), st.floats(allow_nan=True), st.text(max_size=3)), max_size=3)
agent_settings = st.dictionaries(st.sampled_from(["learning_rate", "hidden", "n_envs", "gamma", "colour"]),
                                 st.one_of(st.floats(allow_nan=True), st.integers(-5, 100),
                                           st.lists(st.integers(0, 64), max_size=2), st.text(max_size=4)),
                                 max_size=2)
evaluation = table({}, {"method": st.sampled_from(["auto", "exact", "simulate", "guess"]),
                        "replications": st.integers(0, 200), "periods": st.integers(0, 500),
                        "warmup": st.integers(-1, 50)})
policy = st.one_of(
    table({"name": st.just("optimum")}, {"label": st.text(max_size=4)}),
    table({"name": st.sampled_from(["base_stock", "s_S", "pil", "myopic", "capped_base_stock", "nope"])},
          {"params": params, "seeds": st.lists(st.integers(-1, 5), max_size=3), "evaluation": evaluation,
           "models": st.lists(st.sampled_from(["lost_sales", "backorder", "retail"]), max_size=2)}),
    table({"agent": st.sampled_from(["ppo", "dqn", "rollout", "nope"]), "steps": st.integers(-1, 10**6)},
          {"settings": agent_settings, "cpu_seconds": st.floats(allow_nan=True, allow_infinity=True)}),
    table({"function": st.sampled_from(WORDS)}, {"params": params, "label": st.text(max_size=4)}),
)
suite_dict = st.integers(0, 7).flatmap(lambda i: anything if i == 0 else near_valid)
near_valid = (
    table({"suite": table({"name": st.from_regex(r"[a-z][a-z0-9-]{0,8}", fullmatch=True)},
                          {"seeds": st.lists(st.integers(0, 5), min_size=1, max_size=3).map(lambda v: sorted(set(v))),
                           "description": st.text(max_size=5), "sweep": st.sampled_from(["", "lead_time"]),
                           "invented": st.booleans()}),
           "instances": st.lists(instance, min_size=1, max_size=3),
           "policies": st.lists(policy, min_size=1, max_size=4)},
          {"evaluation": evaluation})
)

#: a field path: "suite.name", "instances[0]", "policies[2].params.S", "'odd key'", "suite file"
FIELD = re.compile(r"""^(suite file|(?:[^\s:'"]|'(?:[^'\\]|\\.)*'|"(?:[^"\\]|\\.)*")+):""")


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(suite_dict)
def test_any_suite_dict_is_valid_or_refused_with_one_line_naming_a_field(data):
    try:
        suite = suite_from_dict(data)
    except (SpecError, BudgetError) as e:
        msg = str(e)
        assert "\n" not in msg and "\r" not in msg, msg
        assert FIELD.match(msg), msg
        return
    # valid: it expands into cells and survives the round trip through the stored suite.toml
    cells = suite.cells()
    assert cells and all(c.seed >= 0 for c in cells)
    again = suite_from_dict(tomllib.loads(suite.to_toml()))
    assert [c.cell_id for c in again.cells()] == [c.cell_id for c in cells]
