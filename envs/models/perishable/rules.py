"""The perishable period rules, written once over state coordinates (see `envs/models/rules.py`):
the batch step on numpy and the compiled kernels both run `period`."""
from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from ..rules import Params, Rules, order_cost, params, pipeline_shift

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def period(s: Any, a: Any, d: Any, ip: Any, fp: Any, nxt: Any, costs: Any, flows: Any, work: Any) -> None:
    """State: on-hand by remaining life (oldest first), then orders arriving in 1 .. L-1 (layout
    in model.py); ip = [shelf life m, L, 1 for LIFO issuing]; fp = [h, p, outdating, unit, fixed];
    work[0 .. m-1] holds the stock by life while demand is met."""
    m, L, lifo = ip[0], ip[1], ip[2]
    order = a[0]
    for j in range(m - 1):
        work[j] = s[j]
    work[m - 1] = order if L == 0 else s[m - 1]  # with L = 0 the order arrives at once, fresh
    left = d
    for k in range(m):  # FIFO: oldest first; LIFO: freshest first
        j = m - 1 - k if lifo else k
        take = np.minimum(work[j], left)
        work[j] = work[j] - take
        left = left - take
    outdated = work[0]
    carried = d * 0  # units carried over, now one period older (life 1 .. m-1)
    for j in range(1, m):
        nxt[j - 1] = work[j]
        carried = carried + work[j]
    if L == 0:
        received = order * 0
    else:
        received = pipeline_shift(s, nxt, m - 1, L, order)
        nxt[m - 1] = received
    costs[0] = fp[0] * carried
    costs[1] = fp[1] * left
    costs[2] = fp[2] * outdated
    costs[3] = order_cost(order, fp[3], fp[4])
    flows[0] = d - left
    flows[1] = left
    flows[2] = outdated
    flows[3] = received


def pack(spec: "InstanceSpec") -> Params | None:
    L = spec.lead_time
    if isinstance(L, bool) or not isinstance(L, (int, np.integer)):
        return None
    return params([spec.shelf_life, L, int(spec.issuing == "lifo")],
                  [spec.holding_cost, spec.shortage_cost, spec.outdating_cost, spec.unit_order_cost,
                   spec.fixed_order_cost], work=spec.shelf_life)


RULES = Rules(period, ("holding", "shortage", "outdating", "ordering"), ("sales", "lost", "outdated", "received"),
              pack, helpers=(pipeline_shift, order_cost))
