"""Properties of the step functions (hypothesis): units conserved, costs >= 0, reproducible runs."""
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from invbench.envs.models import get_model
from invbench.envs.spec import spec_from_dict


def _step(model, state, order, demand, lead_time, **costs):
    spec = spec_from_dict({"model": model, "lead_time": lead_time, "demand": {"distribution": "poisson", "mean": 5},
                           "max_order": 100, **costs})
    return get_model(model).step(spec, state, order, demand)

batch = st.integers(1, 20)


@st.composite
def step_inputs(draw, model):
    L = draw(st.integers(0, 4))
    B = draw(batch)
    n = max(L, 1)
    lo = -30 if model == "backorder" else 0
    first = draw(st.lists(st.integers(lo, 40), min_size=B, max_size=B))
    pipe = draw(st.lists(st.lists(st.integers(0, 20), min_size=n - 1, max_size=n - 1), min_size=B, max_size=B))
    state = np.column_stack([np.array(first)] + ([np.array(pipe)] if n > 1 else []))
    order = np.array(draw(st.lists(st.integers(0, 25), min_size=B, max_size=B)))
    demand = np.array(draw(st.lists(st.integers(0, 40), min_size=B, max_size=B)))
    costs = dict(holding_cost=draw(st.floats(0, 5)), shortage_cost=draw(st.floats(0.01, 50)),
                 unit_order_cost=draw(st.floats(0, 3)), fixed_order_cost=draw(st.floats(0, 30)))
    return L, state.astype(np.int64).reshape(B, n), order, demand, costs


@settings(max_examples=200, deadline=None)
@given(step_inputs("lost_sales"))
def test_lost_sales_conserves_units_and_costs_are_nonnegative(args):
    L, state, order, demand, costs = args
    nxt, parts = _step("lost_sales", state, order, demand, L, **costs)
    start = state[:, 0] + (order if L == 0 else 0)
    # start stock + what arrives = end stock + sales (conservation of units; common practice)
    assert np.array_equal(start, parts.end_level + parts.sales)
    assert np.array_equal(nxt[:, 0], parts.end_level + parts.received)
    assert np.array_equal(parts.sales + parts.lost, demand)
    # pipeline plus stock: everything ordered is either still there or sold
    assert np.array_equal(state.sum(1) + order, nxt.sum(1) + parts.sales)
    for c in (parts.holding, parts.shortage, parts.ordering):
        assert np.all(c >= 0)
    assert np.all(nxt >= 0)


@settings(max_examples=200, deadline=None)
@given(step_inputs("backorder"))
def test_backorder_conserves_units_and_costs_are_nonnegative(args):
    L, state, order, demand, costs = args
    nxt, parts = _step("backorder", state, order, demand, L, **costs)
    # inventory position falls by demand and rises by the order (common practice)
    assert np.array_equal(nxt.sum(1), state.sum(1) + order - demand)
    assert np.array_equal(parts.backordered, np.maximum(-parts.end_level, 0))
    assert np.all(parts.sales <= demand) and np.all(parts.sales >= 0)
    for c in (parts.holding, parts.shortage, parts.ordering):
        assert np.all(c >= 0)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), L=st.integers(0, 3))
def test_same_seed_same_trajectory(seed, L):
    import gymnasium as gym
    import invbench  # noqa: F401  (registers the ids)

    def run():
        env = gym.make("invbench/LostSales-v0", lead_time=L, episode_length=30)
        obs, _ = env.reset(seed=seed)
        env.action_space.seed(seed)
        out = [obs]
        for _ in range(30):
            obs, r, term, trunc, info = env.step(env.action_space.sample())
            out.append(np.append(obs, [r, info["demand"]]))
        return np.concatenate(out)

    assert np.array_equal(run(), run())
