"""Shared pieces of the dual-sourcing policies: the two inventory positions they watch, the
[regular, expedited] order pair, and a profile search over one outer parameter.

Positions, for a state [net, regular in transit 1 .. lr-1, expedited in transit 1 .. le-1]:
the expedited inventory position counts what arrives within le periods (the net inventory,
the regular orders due in 1 .. le periods and every expedited order in transit), the
regular one counts everything (net inventory plus all in transit).
"""
from __future__ import annotations

from typing import Any, Callable

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.newsvendor import order_up_to_level
from invbench.envs.spec import InstanceSpec

from ._common import as_states
from ._search import pattern_search


def positions(obs: Any, spec: InstanceSpec) -> tuple[np.ndarray, np.ndarray]:
    """(expedited inventory position, regular inventory position) per row."""
    s = as_states(obs, spec)
    lr, le = spec.lead_time, spec.expedited_lead_time
    ip_e = s[:, 0] + s[:, 1:1 + min(le, lr - 1)].sum(axis=1) + s[:, lr:].sum(axis=1)
    return ip_e, s.sum(axis=1)


def order_pair(spec: InstanceSpec, regular: np.ndarray, expedited: np.ndarray) -> np.ndarray:
    """[B, 2] legal orders (each rounded down into [0, max_order])."""
    return np.column_stack([legal_orders(spec, regular), legal_orders(spec, expedited)])


def single_levels(spec: InstanceSpec) -> tuple[int, int]:
    """Newsvendor levels of single sourcing from each supplier: the fractile of demand over
    le + 1 and over lr + 1 periods (backorder base-stock; Zipkin 2000, from memory); search
    starting points only."""
    return (order_up_to_level(spec, periods=spec.expedited_lead_time + 1),
            order_up_to_level(spec, periods=spec.lead_time + 1))


def profile_search(outer: tuple[int, int], start: int, inner_start: tuple[int, ...],
                   inner_steps: tuple[int, ...], score: Callable[[int, tuple[int, ...]], float],
                   inner_clamp: Callable[[tuple[int, ...]], tuple[int, ...]], exhaustive: int = 16) -> None:
    """For each value k of the outer parameter in [lo, hi], the best inner point by a pattern
    search warm-started from the nearest k already tried; over k, all values when there are at
    most `exhaustive` of them, else a pattern search (patience 2) on the profile cost. Searching
    all parameters jointly stalls in curved valleys (a smaller cap wants a higher level).
    Results land in the caller's scorer; read them with `scorer.best_point()`."""
    lo, hi = outer
    best: dict[int, tuple[int, ...]] = {}

    def profile(k: int) -> float:
        near = min(best, key=lambda kk: abs(kk - k)) if best else None
        x0 = inner_start if near is None else best[near]
        x, c = pattern_search(lambda y: score(k, y), x0, inner_steps, inner_clamp)
        best[k] = x
        return c

    if hi - lo + 1 <= exhaustive:
        order = sorted(range(lo, hi + 1), key=lambda k: abs(k - start))  # warm starts stay close
        for k in order:
            profile(k)
        return
    pattern_search(lambda x: profile(x[0]), (start,), (max(1, (hi - lo) // 8),),
                   lambda x: (min(max(x[0], lo), hi),), patience=2)
