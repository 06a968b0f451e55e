"""The serial-chain period rules, written once over state coordinates (see
`envs/models/rules.py`): the batch step on numpy and the compiled kernels both run `period`."""
from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from ..rules import Params, Rules, params, pipeline_shift

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def period(s: Any, a: Any, d: Any, ip: Any, fp: Any, nxt: Any, costs: Any, flows: Any, work: Any) -> None:
    """State: per stage (stage 1 first) [stock, units arriving in 1 .. L_j - 1]; orders one per
    stage; ip = [N, L_1 .. L_N]; fp = [p, h_1 .. h_N]; work[j] is stage j's stock while orders
    are filled, work[N + j] what is shipped to stage j."""
    N = ip[0]
    first = 0
    for j in range(N):
        work[j] = s[first]
        work[N + j] = d * 0
        first = first + max(ip[1 + j], 1)
    work[2 * N - 1] = a[N - 1]  # the outside supplier ships every order in full
    for j in range(N - 1, -1, -1):  # down the chain, so a zero lead time passes stock on at once
        if ip[1 + j] == 0:
            work[j] = work[j] + work[N + j]
        if j > 0:
            work[N + j - 1] = np.minimum(a[j - 1], work[j])
            work[j] = work[j] - work[N + j - 1]
    sales = np.minimum(np.maximum(work[0], 0), d)
    work[0] = work[0] - d
    backordered = np.maximum(-work[0], 0)
    holding = d * 0.0
    transit = d * 0.0
    first = 0
    for j in range(N):
        L = ip[1 + j]
        width = max(L, 1)
        holding = holding + fp[1 + j] * np.maximum(work[j], 0)
        if L >= 1 and j + 1 < N:  # stock from the outside supplier costs nothing in transit
            pipe = work[N + j]
            for i in range(first + 1, first + width):
                pipe = pipe + s[i]
            transit = transit + fp[2 + j] * pipe
        if L == 0:
            nxt[first] = work[j]
        else:
            nxt[first] = work[j] + pipeline_shift(s, nxt, first, width, work[N + j])
        first = first + width
    costs[0] = holding
    costs[1] = transit
    costs[2] = fp[0] * backordered
    flows[0] = sales
    flows[1] = backordered
    flows[2] = work[0]
    flows[3] = work[2 * N - 1]


def pack(spec: "InstanceSpec") -> Params:
    L = list(spec.lead_times)
    return params([len(L), *L], [spec.shortage_cost, *spec.holding_costs], work=2 * len(L))


RULES = Rules(period, ("holding", "in_transit", "shortage"), ("sales", "backordered", "end_level", "supplied"), pack,
              helpers=(pipeline_shift,))
