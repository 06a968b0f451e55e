"""The dual-sourcing period rules, written once over state coordinates (see
`envs/models/rules.py`): the batch step on numpy and the compiled kernels both run `period`."""
from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from ..rules import Params, Rules, params, pipeline_shift

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def period(s: Any, a: Any, d: Any, ip: Any, fp: Any, nxt: Any, costs: Any, flows: Any, work: Any) -> None:
    """State [net inventory, regular orders arriving in 1 .. lr-1, expedited in 1 .. le-1];
    orders [regular, expedited]; ip = [lr, le]; fp = [h, p, regular unit cost, expedited unit cost]."""
    lr, le = ip[0], ip[1]
    qr, qe = a[0], a[1]
    available = s[0] + qe if le == 0 else s[0]  # an expedited order with lead time 0 arrives at once
    end = available - d
    sales = np.minimum(np.maximum(available, 0), d)
    backordered = np.maximum(-end, 0)
    received = pipeline_shift(s, nxt, 0, lr, qr)  # lr >= 1 always (lr > le >= 0)
    if le >= 1:
        received = received + pipeline_shift(s, nxt, lr - 1, le, qe)
    nxt[0] = end + received
    costs[0] = fp[0] * np.maximum(end, 0)
    costs[1] = fp[1] * backordered
    costs[2] = fp[2] * qr
    costs[3] = fp[3] * qe
    flows[0] = sales
    flows[1] = backordered
    flows[2] = end
    flows[3] = received


def pack(spec: "InstanceSpec") -> Params | None:
    lr, le = spec.lead_time, spec.expedited_lead_time
    if any(isinstance(x, bool) or not isinstance(x, (int, np.integer)) for x in (lr, le)):
        return None
    return params([lr, le], [spec.holding_cost, spec.shortage_cost, spec.unit_order_cost, spec.expedited_unit_cost])


RULES = Rules(period, ("holding", "shortage", "regular_ordering", "expedited_ordering"),
              ("sales", "backordered", "end_level", "received"), pack, helpers=(pipeline_shift,))
