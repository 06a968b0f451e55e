"""Expected holding + shortage cost charged at the arrival of an order, for the backorder model.

With backorders, the end-of-period net inventory in period t + L is y - D[t..t+L], where y is
the inventory position after ordering in t. So the cost of period t + L is a function G(y) of y
alone. With a random lead time (orders in sequence) the long-run average cost is still the
mean of G over the positions after ordering, with demand over L + 1 periods mixed over L (see
`newsvendor.lead_time_demand_pmf`). G is computed by running the model's own step function
(with L = 0 and no order) on state y against that demand pmf, so no second copy of the cost
rules exists.
"""
from __future__ import annotations

import numpy as np

from typing import TYPE_CHECKING

from invbench.envs.newsvendor import lead_time_demand_pmf

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def lead_time_cost(spec: "InstanceSpec", levels: np.ndarray) -> np.ndarray:
    """G(y) for each inventory position y in `levels` (backorder model), per period."""
    # G(y) needs unmet demand carried over: the model must be its own backorder twin (as in
    # agents.scaling's position floor), else the cost of t + L is not a function of y alone.
    if spec.model_def.backorder_twin(spec) is not spec:
        raise ValueError("lead_time_cost: defined for models that backorder unmet demand")
    levels = np.asarray(levels, dtype=np.int64).reshape(-1)
    pmf = lead_time_demand_pmf(spec).normalized()  # mixed over L when the lead time is random
    once = spec.with_(lead_time=0, unit_order_cost=0.0, fixed_order_cost=0.0)
    d = np.arange(len(pmf), dtype=np.int64)
    y = np.repeat(levels, len(d))
    dd = np.tile(d, len(levels))
    _, parts = once.model_def.step(once, y[:, None], np.zeros_like(y), dd)
    cost = (parts.holding + parts.shortage).reshape(len(levels), len(d))
    return cost @ pmf
