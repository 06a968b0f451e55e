"""Shared fixtures: instance builders used across the test files."""
from __future__ import annotations

import pytest

import invbench


def lost_sales(L: int, p: float, mean: float = 5.0, **kw) -> invbench.InstanceSpec:
    return invbench.load_spec({"model": "lost_sales", "lead_time": L, "holding_cost": 1.0, "shortage_cost": p,
                               "demand": {"distribution": "poisson", "mean": mean}, **kw})


def backorder(L: int, p: float, mean: float = 5.0, **kw) -> invbench.InstanceSpec:
    return invbench.load_spec({"model": "backorder", "lead_time": L, "holding_cost": 1.0, "shortage_cost": p,
                               "demand": {"distribution": "poisson", "mean": mean}, **kw})


@pytest.fixture
def small_lost_sales() -> invbench.InstanceSpec:
    return lost_sales(2, 9.0, mean=3.0)
