"""The Policy contract: `act(obs[B, n]) -> orders[B]` in units.

Analytic policies, DP tables and trained networks all satisfy it, so evaluators never ask what
they hold. `as_policy` wraps a plain callable (a user's network, an SB3 model's predict) too.
"""
from __future__ import annotations

from typing import Any, Callable, Protocol, runtime_checkable

import numpy as np


@runtime_checkable
class Policy(Protocol):
    def act(self, obs: np.ndarray) -> np.ndarray: ...


class PolicyBase:
    """Small base class for named policies with parameters."""

    name: str = "policy"

    def act(self, obs: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def params(self) -> dict[str, Any]:
        return {}

    def describe(self) -> str:
        ps = ", ".join(f"{k}={v}" for k, v in self.params().items())
        return f"{self.name}({ps})"

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "params": self.params()}


class CallablePolicy(PolicyBase):
    """Wraps `f(obs_batch) -> orders` (units). Output is rounded and checked for shape."""

    name = "callable"

    def __init__(self, fn: Callable[[np.ndarray], Any], label: str = "callable") -> None:
        self.fn = fn
        self.label = label

    def act(self, obs: np.ndarray) -> np.ndarray:
        out = self.fn(obs)
        if isinstance(out, tuple):  # e.g. SB3 `predict` returns (actions, states)
            out = out[0]
        arr = np.asarray(out).reshape(-1)
        if arr.shape[0] != obs.shape[0]:
            raise ValueError(f"policy: returned {arr.shape[0]} orders for {obs.shape[0]} observations")
        return np.rint(arr).astype(np.int64)

    def describe(self) -> str:
        return self.label


def as_policy(obj: Any) -> Policy:
    """A Policy from a policy object or a callable mapping an observation batch to orders in units."""
    if hasattr(obj, "act") and callable(obj.act):
        return obj
    if callable(obj):
        return CallablePolicy(obj)
    raise TypeError("policy: must have act(obs) or be a callable from an observation batch to orders")


def legal_orders(spec: Any, orders: np.ndarray) -> np.ndarray:
    """Round orders down to a case-pack multiple and clip into [0, order cap] (units)."""
    q = spec.case_pack
    o = np.clip(np.asarray(orders, dtype=np.int64), 0, spec.order_cap_units)
    return (o // q) * q
