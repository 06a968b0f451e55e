"""The rollout agent's first policy: the cheapest classical policy defined for the instance.

Every classical policy registered in `baselines/policies/` that supports the instance's model and
kind of lead time is optimised by its own search (`make_policy` without parameters, the search
the bench runs for its classical cells) and the one with the lowest long-run average cost is
the start: (s, S) when there is a fixed order cost, a base-stock or capped rule otherwise, the
dual-index rules for dual sourcing, echelon base-stock for the serial chain. The search may use
`start_share` of the CPU budget; policies that would not fit in it are skipped (and listed).
When no classical policy fits the instance, the agent falls back to its own simple rule.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any

from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.spec import InstanceSpec

#: Optimising a constant order takes long and it is never the cheapest (the portfolio's choice too).
SKIP = ("constant_order",)


@dataclass
class StartChoice:
    """Which classical policy the agent started from, what it costs, and what the search took."""

    name: str
    params: dict[str, Any]
    cost: float
    method: str
    cpu_seconds: float
    tried: dict[str, Any] = field(default_factory=dict)  # name -> average cost, or why it failed
    skipped: list[str] = field(default_factory=list)  # not reached within the start share
    policy: Any = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "params": dict(self.params), "cost": self.cost, "method": self.method,
                "cpu_seconds": self.cpu_seconds, "tried": dict(self.tried), "skipped": list(self.skipped)}


def _average_cost(spec: InstanceSpec, policy: Any) -> tuple[float, str]:
    """The cost its optimiser found, else the search's own scoring (exact, or CRN simulation)."""
    opt = getattr(policy, "optimum", None)
    if opt is not None:
        return float(opt.cost), str(opt.method)
    from invbench.baselines.policies._search import _plain_exact
    res = _plain_exact(spec if spec.discount >= 1 else spec.with_(discount=1.0), policy, None)
    return float(res.cost), str(getattr(res, "method", "exact"))


def best_classical(spec: InstanceSpec, max_seconds: float = 0.0) -> StartChoice | None:
    """The cheapest optimised classical policy for `spec`, or None when none is defined.

    max_seconds > 0: a policy is skipped when the search so far plus the longest single search
    so far would exceed it (the registry lists the cheap, common ones first).
    """
    from invbench.baselines.policies.registry import make_policy, policies_for_instance
    c0 = time.process_time()
    best: tuple[float, str, Any, str] | None = None
    tried: dict[str, Any] = {}
    skipped: list[str] = []
    longest = 0.0  # the longest single search so far: the next one is assumed to take as long
    for name in policies_for_instance(spec):
        if name in SKIP:
            continue
        t0 = time.process_time()
        if max_seconds > 0 and best is not None and t0 - c0 + longest > max_seconds:
            skipped.append(name)
            continue
        try:
            pol = make_policy(spec, name)
            cost, method = _average_cost(spec, pol)
        except (BudgetError, SpecError, ValueError) as e:  # a policy without a finite optimum here
            tried[name] = f"failed: {str(e).splitlines()[0][:200]}"
            longest = max(longest, time.process_time() - t0)
            continue
        tried[name] = cost
        longest = max(longest, time.process_time() - t0)
        if math.isfinite(cost) and (best is None or cost < best[0]):
            best = (cost, name, pol, method)
    if best is None:
        return None
    cost, name, pol, method = best
    return StartChoice(name, dict(pol.params()), cost, method, time.process_time() - c0, tried, skipped, pol)
