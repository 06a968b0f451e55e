"""The lost-sales period rules, written once over state coordinates (see `envs/models/rules.py`):
the batch step on numpy and the compiled kernels both run `period`."""
from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from ..rules import Params, Rules, order_cost, params, pipeline_shift

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def period(s: Any, a: Any, d: Any, ip: Any, fp: Any, nxt: Any, costs: Any, flows: Any, work: Any) -> None:
    """State [on-hand after receipt, orders arriving in 1 .. L-1]; ip = [L]; fp = [h, p, unit, fixed]."""
    L = ip[0]
    order = a[0]
    available = s[0] + order if L == 0 else s[0]  # with L = 0 the order arrives at once
    sales = np.minimum(available, d)
    end = available - sales
    lost = d - sales
    received = order * 0 if L == 0 else pipeline_shift(s, nxt, 0, L, order)
    nxt[0] = end + received
    costs[0] = fp[0] * end
    costs[1] = fp[1] * lost
    costs[2] = order_cost(order, fp[2], fp[3])
    flows[0] = sales
    flows[1] = lost
    flows[2] = end
    flows[3] = received


def pack(spec: "InstanceSpec") -> Params | None:
    """None for a lead time that is not one fixed integer (not covered by these rules)."""
    L = spec.lead_time
    if isinstance(L, bool) or not isinstance(L, (int, np.integer)):
        return None
    return params([L], [spec.holding_cost, spec.shortage_cost, spec.unit_order_cost, spec.fixed_order_cost])


RULES = Rules(period, ("holding", "shortage", "ordering"), ("sales", "lost", "end_level", "received"), pack,
              helpers=(pipeline_shift, order_cost))
