"""The newsvendor critical fractile, written once: the ratio p / (p + h), the smallest level
whose cdf reaches it, and the order-up-to level on demand over L + 1 periods (backorder
base-stock; Zipkin 2000, from memory). Solvers use it for first bounds, policies for starting
points and formulas, agents for scaling."""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from .demand import DiscretePmf
    from .spec import InstanceSpec


def critical_ratio(spec: "InstanceSpec", holding: float | None = None) -> float:
    """p / (p + h); 0.5 when both costs are 0. h is the model's carrying cost (the holding cost,
    plus e.g. the outdating of perishable stock) unless `holding` is given."""
    h = spec.model_def.carrying_cost(spec) if holding is None else holding
    p = spec.shortage_cost
    return p / (p + h) if p + h > 0 else 0.5


def fractile(cdf: np.ndarray, ratio: float) -> int:
    """Smallest level y with cdf[y] >= ratio, at most the last level of the table."""
    return int(min(np.searchsorted(cdf, ratio - 1e-12), len(cdf) - 1))


def lead_time_demand_pmf(spec: "InstanceSpec") -> "DiscretePmf":
    """Demand over L + 1 periods; for a random lead time the mixture over L (Zipkin 2000, from
    memory: with orders in sequence the backorder net inventory is the position V periods
    earlier minus V + 1 periods of demand, V distributed as L)."""
    law = spec.lead_time_law
    if law is None:
        return spec.demand.lead_time_pmf(spec.lead_time + 1)
    from .lead_time import lead_time_demand
    return lead_time_demand(spec.demand, law)


def order_up_to_level(spec: "InstanceSpec", periods: int | None = None, holding: float | None = None) -> int:
    """Critical-fractile level of demand over `periods` (default L + 1, L random or fixed) periods."""
    pmf = lead_time_demand_pmf(spec) if periods is None else spec.demand.lead_time_pmf(periods)
    return fractile(pmf.cdf(), critical_ratio(spec, holding))
