"""The backorder period rules, written once over state coordinates (see `envs/models/rules.py`):
the batch step on numpy and the compiled kernels both run `period`."""
from __future__ import annotations

from typing import Any

import numpy as np

from ..lost_sales.rules import pack
from ..rules import Rules, order_cost, pipeline_shift


def period(s: Any, a: Any, d: Any, ip: Any, fp: Any, nxt: Any, costs: Any, flows: Any, work: Any) -> None:
    """State [net inventory after receipt, orders arriving in 1 .. L-1]; ip = [L]; fp = [h, p, unit, fixed]."""
    L = ip[0]
    order = a[0]
    available = s[0] + order if L == 0 else s[0]
    end = available - d
    # sales: this period's demand met at once from stock (the fill); the rest waits
    sales = np.minimum(np.maximum(available, 0), d)
    backordered = np.maximum(-end, 0)
    received = order * 0 if L == 0 else pipeline_shift(s, nxt, 0, L, order)
    nxt[0] = end + received
    costs[0] = fp[0] * np.maximum(end, 0)
    costs[1] = fp[1] * backordered
    costs[2] = order_cost(order, fp[2], fp[3])
    flows[0] = sales
    flows[1] = backordered
    flows[2] = end
    flows[3] = received


RULES = Rules(period, ("holding", "shortage", "ordering"), ("sales", "backordered", "end_level", "received"), pack,
              helpers=(pipeline_shift, order_cost))
