"""The Policy contract: `act(obs[B, n]) -> orders[B]` (or [B, k] with k order slots) in units.

Analytic policies, DP tables and trained networks all satisfy it, so evaluators never ask what
they hold. `as_policy` wraps a plain callable (a user's network, an SB3 model's predict) too.
"""
from __future__ import annotations

from typing import Any, Callable, Protocol, runtime_checkable

import numpy as np

from invbench.envs.errors import SpecError


@runtime_checkable
class Policy(Protocol):
    def act(self, obs: np.ndarray) -> np.ndarray: ...


class PolicyBase:
    """Small base class for named policies with parameters.

    `models` names the models a policy is defined for (empty: any); suites pair a policy only
    with instances of those models, and building it for another model is refused.
    `lead_time_kinds` names the lead times it is defined for: "fixed", "in_sequence" (random,
    orders never cross) and "crossing" (random, drawn per order); other instances likewise.
    """

    name: str = "policy"
    models: tuple[str, ...] = ()
    lead_time_kinds: tuple[str, ...] = ("fixed",)

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
        arr = np.asarray(out)
        if arr.ndim == 0 or arr.shape[0] != obs.shape[0]:
            raise SpecError(f"policy: returned {arr.size} orders for {obs.shape[0]} observations")
        return arr  # checked (not rounded) by the evaluator

    def describe(self) -> str:
        return self.label


def as_policy(obj: Any) -> Policy:
    """A Policy from a policy object or a callable mapping an observation batch to orders in units."""
    if hasattr(obj, "act") and callable(obj.act):
        return obj
    if callable(obj):
        return CallablePolicy(obj)
    raise SpecError("policy: must have act(obs) or be a callable from an observation batch to orders "
                    f"in units, got {type(obj).__name__}")


def legal_orders(spec: Any, orders: np.ndarray) -> np.ndarray:
    """A policy's own projection: round orders down to a case-pack multiple and clip into
    [0, order cap] (units). Classical policies use it to define their orders; evaluators do not
    (they call `checked_orders`, which refuses instead of changing an order)."""
    q = spec.case_pack
    o = np.clip(np.asarray(orders, dtype=np.int64), 0, spec.order_cap_units)
    return (o // q) * q


def checked_orders(spec: Any, orders: Any, states: np.ndarray, *, clip: bool = False) -> tuple[np.ndarray, int]:
    """Orders [B, k] in units as a policy returned them, checked against the legal sizes.

    By default an order that is negative, not a whole number, NaN, off the case pack or over
    the cap is refused with the state and the value (SpecError). With clip=True it is moved to
    the nearest legal size at or below it instead, and the count of changed orders is returned,
    so the caller can say so.
    """
    slots = spec.order_slots
    k = len(slots)
    B = len(states)
    try:
        raw = np.asarray(orders, dtype=np.float64).reshape(B, k)
    except (TypeError, ValueError):
        raise SpecError(f"policy: must return {k} order(s) in units per state for {B} states, "
                        f"got shape {list(np.shape(orders))}") from None
    out = np.empty((B, k), dtype=np.int64)
    changed = np.zeros(B, dtype=bool)
    for j, slot in enumerate(slots):
        x = raw[:, j]
        sizes = slot.sizes_units
        finite = np.isfinite(x)
        xi = np.where(finite, np.rint(x), -1).astype(np.int64)
        pos = np.searchsorted(sizes, xi)
        exact = finite & (x == np.rint(x)) & (pos < len(sizes)) & (sizes[np.minimum(pos, len(sizes) - 1)] == xi)
        if not np.all(exact):
            if not clip:
                r = int(np.argmin(exact))
                step = sizes[1] - sizes[0] if len(sizes) > 1 else 1
                raise SpecError(
                    f"policy: order {x[r]!r} ({slot.name}) in state {list(map(int, states[r]))} is not a legal size "
                    f"(multiples of {step} in [0, {slot.cap_units}]); pass clip=True to round it to one")
            fixed = np.where(finite, x, 0.0)
            idx = np.searchsorted(sizes, np.floor(fixed), side="right") - 1
            xi = sizes[np.clip(idx, 0, len(sizes) - 1)]
            changed |= ~exact
        out[:, j] = xi
    return out, int(changed.sum())
