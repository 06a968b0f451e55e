"""Shared pieces of the classical policies: observation handling, parameter checks, and the
record of how a policy's parameters were found (`Optimum`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterable, Mapping

import numpy as np

from invbench.baselines.policy import PolicyBase
from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import critical_ratio, fractile  # noqa: F401  (shared by the policies)
from invbench.envs.spec import InstanceSpec


def as_states(obs: Any, spec: InstanceSpec) -> np.ndarray:
    """Observation batch [B, n] (a single [n] observation counts as B = 1) as int64 states."""
    arr = np.asarray(obs)
    if arr.ndim == 1:
        arr = arr.reshape(1, -1)
    if arr.ndim != 2 or arr.shape[1] != spec.state_dim:
        raise ValueError(f"obs: must have shape [B, {spec.state_dim}], got {list(np.shape(obs))}")
    if arr.dtype.kind == "f":
        arr = np.rint(arr)  # env observations are float32 copies of integer states
    return arr.astype(np.int64)


def inventory_position(states: np.ndarray) -> np.ndarray:
    """Stock level plus everything in transit (the sum of the state)."""
    return states.sum(axis=1)


def check_names(policy: str, params: Mapping[str, Any], required: Iterable[str],
                optional: Iterable[str] = ()) -> None:
    required, optional = tuple(required), tuple(optional)
    allowed = required + optional
    for k in params:
        if k not in allowed:
            txt = ", ".join(allowed) if allowed else "none"
            raise SpecError(f"param.{k}: unknown parameter for {policy} (allowed: {txt})")
    for k in required:
        if k not in params:
            raise SpecError(f"param.{k}: required for {policy}")


def int_param(name: str, v: Any, lo: int | None = None, hi: int | None = None) -> int:
    """An integer parameter within [lo, hi]; floats holding a whole number are accepted."""
    if lo is not None and hi is not None:
        rng = f"an integer in [{lo}, {hi}]"
    elif lo is not None:
        rng = f"an integer >= {lo}"
    elif hi is not None:
        rng = f"an integer <= {hi}"
    else:
        rng = "an integer"
    if isinstance(v, (bool, np.bool_)):
        raise SpecError(f"param.{name}: must be {rng}, got {v!r}")
    if isinstance(v, (float, np.floating)) and math.isfinite(v) and float(v).is_integer():
        v = int(v)
    if not isinstance(v, (int, np.integer)):
        raise SpecError(f"param.{name}: must be {rng}, got {v!r}")
    v = int(v)
    if (lo is not None and v < lo) or (hi is not None and v > hi):
        raise SpecError(f"param.{name}: must be {rng}, got {v}")
    return v


def num_param(name: str, v: Any, lo: float | None = None) -> float:
    rng = f"a number >= {lo:g}" if lo is not None else "a finite number"
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise SpecError(f"param.{name}: must be {rng}, got {v!r}")
    v = float(v)
    if not math.isfinite(v) or (lo is not None and v < lo):
        raise SpecError(f"param.{name}: must be {rng}, got {v:g}")
    return v


def order_param(name: str, v: Any, spec: InstanceSpec) -> int:
    """An order size in units: a case-pack multiple in [0, order cap]."""
    r = int_param(name, v, 0, spec.order_cap_units)
    if r % spec.case_pack:
        raise SpecError(f"param.{name}: must be a multiple of the case pack ({spec.case_pack} units), "
                        f"got {r}")
    return r


def normalized_mean(spec: InstanceSpec) -> float:
    """Mean one-period demand of the pmf the solvers use (truncated, rescaled to sum to one)."""
    p = spec.demand.pmf().normalized()
    return float(np.dot(np.arange(len(p)), p))


@dataclass
class Optimum:
    """How a policy's parameters were found and what they cost (per period, average cost).

    `method` is "analytic" (a formula, exact for the model) or "exact_search" (a local search
    whose every candidate was scored by exact evaluation); `evaluations` counts those scorings.
    Every optimiser here minimises the long-run average cost, also for a spec with discount < 1.
    """

    method: str
    cost: float
    parts: dict[str, float] = field(default_factory=dict)  # cost per period by named part
    evaluations: int = 0
    note: str = ""
    extra: dict[str, Any] = field(default_factory=dict)

    def __getattr__(self, key: str) -> float:
        parts = self.__dict__.get("parts") or {}
        if key in parts:  # cost parts read as attributes (optimum.holding), whatever the model
            return parts[key]
        raise AttributeError(key)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"method": self.method, "criterion": "average", "cost": self.cost,
                             "evaluations": self.evaluations}
        d.update(self.parts)
        if self.note:
            d["note"] = self.note
        d.update(self.extra)
        return d


class ClassicalPolicy(PolicyBase):
    """Base of the policies here: holds the spec and, once optimised, how (`optimum`)."""

    spec: InstanceSpec
    optimum: Optimum | None = None

    def to_dict(self) -> dict[str, Any]:
        d = super().to_dict()
        if self.optimum is not None:
            d["optimum"] = self.optimum.to_dict()
        return d
