"""What a model is: the one object each model folder provides, and the pieces it is made of.

Everything generic (the Gymnasium env and vector env, the exact solver's MDP build, exact policy
evaluation, the batch simulator, the agents' scaling, the results columns, env registration)
is written against `InventoryModel` and never asks which model it holds.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

if TYPE_CHECKING:  # the spec imports the model registry; type-only import breaks the cycle
    from invbench.envs.random_inputs import InputLaw
    from invbench.envs.spec import InstanceSpec
    from .exact_space import ExactSpace
    from .rules import Rules


@dataclass(frozen=True)
class Field:
    """One spec key: its type, allowed range (or choices), default and meaning."""

    type: type
    default: Any
    description: str
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False
    choices: tuple[str, ...] = ()
    optional: bool = False  # None is allowed (the model derives a value)
    #: (shortest, longest): the value is a list of `type` values, each within lo .. hi
    length: tuple[int, int] | None = None

    def item(self) -> "Field":
        """The field of one entry of a list-valued field."""
        return Field(self.type, None, self.description, self.lo, self.hi, self.lo_open, self.choices)

    def range_text(self) -> str:
        if self.length is not None:
            a, b = self.length
            n = f"{a}" if a == b else f"{a} to {b}"
            return f"a list of {n} entries, each {self.item().range_text()}"
        if self.choices:
            return "one of " + ", ".join(self.choices)
        kind = "an integer" if self.type is int else "a number"
        if self.lo is not None and self.hi is not None:
            return f"{kind} in {'(' if self.lo_open else '['}{self.lo:g}, {self.hi:g}]"
        if self.lo is not None:
            return f"{kind} {'>' if self.lo_open else '>='} {self.lo:g}"
        if self.hi is not None:
            return f"{kind} <= {self.hi:g}"
        return kind


@dataclass
class Outcome:
    """What one period did to each row of a batch: named cost parts and named flows (units).

    `costs` keys are the model's `cost_parts`; `flows` always has `sales` and the model's
    shortfall flow. Attribute access (`outcome.holding`) reads either table.
    """

    costs: dict[str, np.ndarray]
    flows: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def total(self) -> np.ndarray:
        return sum(self.costs.values())  # type: ignore[return-value]

    def __getattr__(self, key: str) -> np.ndarray:
        if key in ("costs", "flows"):
            raise AttributeError(key)
        if key in self.costs:
            return self.costs[key]
        if key in self.flows:
            return self.flows[key]
        raise AttributeError(f"outcome has no part or flow {key!r}")


@dataclass(frozen=True)
class OrderSlot:
    """One order quantity placed per period: its name and legal sizes in units (ascending)."""

    name: str
    sizes_units: np.ndarray

    @property
    def cap_units(self) -> int:
        return int(self.sizes_units[-1])


class InventoryModel:
    """Base of every model. A subclass in its own folder fills in the class attributes and the
    methods marked "model"; the rest is shared.

    State rows are int64 vectors; actions are int64 arrays [B, k] of units, one column per
    order slot; demand is int64 [B].
    """

    name: str = ""
    env_id: str = ""
    env_entry: str = ""  # "module:Class" of the documented Gymnasium env
    title: str = ""
    #: one paragraph on the timing within a period, for the README and the env docstring
    timing: str = ""
    #: model-specific spec keys (the common ones are in envs/spec.py)
    fields: dict[str, Field] = {}
    #: common spec keys this model does not use (refused when given)
    unused_common: tuple[str, ...] = ()
    cost_parts: tuple[str, ...] = ("holding", "shortage", "ordering")
    #: the flow of unmet demand: "lost" or "backordered"
    shortfall: str = "lost"
    #: a negative first state coordinate is possible (net inventory)
    signed_level: bool = False
    #: the state is [stock level, orders arriving in 1 .. L-1 periods] (`pipeline.py`)
    stock_then_pipeline: bool = False
    #: flows that take units out of the inventory position (conservation of units)
    departing: tuple[str, ...] = ("sales",)
    #: a tiny instance (spec dict without "model") for the conformance test and examples
    example: dict[str, Any] = {}
    #: more named instances the conformance test runs too (e.g. a random lead time)
    variants: dict[str, dict[str, Any]] = {}
    #: `lead_time` may be a pmf table (envs/lead_time.py); the step then takes its arrivals input
    random_lead_time: bool = False
    #: the period rules as one pure function (`rules.py`), which `step` runs on numpy and the
    #: env and simulator run compiled; None: no compiled path (the numpy step is used)
    rules: "Rules | None" = None

    # ------------------------------------------------------------------ model: layout
    def check(self, spec: "InstanceSpec") -> None:
        """Checks across fields (raise SpecError naming the field)."""

    def state_labels(self, spec: "InstanceSpec") -> list[str]:  # model
        raise NotImplementedError

    def state_dim(self, spec: "InstanceSpec") -> int:
        return len(self.state_labels(spec))

    def state_low(self, spec: "InstanceSpec") -> np.ndarray:
        """Smallest value of each state coordinate (-inf where it may be negative)."""
        low = np.zeros(self.state_dim(spec))
        if self.signed_level:
            low[0] = -math.inf
        return low

    def order_slots(self, spec: "InstanceSpec") -> list[OrderSlot]:
        """One slot: multiples of the case pack up to the cap (models with several override)."""
        sizes = np.arange(0, spec.order_cap_units + 1, spec.case_pack, dtype=np.int64)
        return [OrderSlot("order", sizes)]

    def start_state(self, spec: "InstanceSpec", batch: int = 1) -> np.ndarray:
        """The default start: no stock, nothing in transit."""
        return np.zeros((batch, self.state_dim(spec)), dtype=np.int64)

    def position(self, spec: "InstanceSpec", states: np.ndarray) -> np.ndarray:
        """Inventory position: stock plus everything in transit."""
        return np.asarray(states).sum(axis=1)

    # ------------------------------------------------------------------ model: dynamics
    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray, **inputs: np.ndarray) -> tuple[np.ndarray, Outcome]:  # model
        """One period for a batch: (next state [B, n], outcome). `inputs` holds one array per
        random input other than demand that `random_inputs` declares (none for most models)."""
        raise NotImplementedError

    #: stock leaves by age as well as by demand (what is kept is bounded by the shelf life)
    perishes: bool = False

    def backorder_twin(self, spec: "InstanceSpec") -> "InstanceSpec | None":
        """The same instance with unmet demand backordered, where that is a model of the project
        (bounds and first guesses of some classical policies come from it); None elsewhere."""
        return None

    def lead_time_text(self, spec: "InstanceSpec") -> str:
        """The lead time(s) for a short instance label: "2", "~pmf(0.2,0.5,0.3)" for a random
        one; a model with several lead times says them all."""
        law = spec.lead_time_law
        return spec.lead_time_text if law is None else "~" + spec.lead_time_text.replace(" ", "-")

    def random_inputs(self, spec: "InstanceSpec") -> tuple["InputLaw", ...]:
        """The period's random inputs besides demand, each independent of demand and of the
        others (`envs/random_inputs.py`); env, simulator, solver and evaluator draw or sum
        over them and pass them to `step` by name."""
        return ()

    def simulation_only(self, spec: "InstanceSpec") -> str:
        """Why this instance has no exact solve or exact evaluation ("" when it has them)."""
        return ""

    def carrying_cost(self, spec: "InstanceSpec") -> float:
        """Cost per unit per period of stock carried, for first guesses (fractile levels, bounds):
        the holding cost here; a model adds what else stock costs it (e.g. outdating)."""
        return float(spec.holding_cost)

    def units_out(self, outcome: Outcome, demand: np.ndarray) -> np.ndarray:
        """Units that left the inventory position this period: the position moves by the
        orders placed minus this (checked on random inputs by the conformance test)."""
        return sum(outcome.flows[k] for k in self.departing)  # type: ignore[return-value]

    def units_in(self, outcome: Outcome, action: np.ndarray) -> np.ndarray:
        """Units that entered the inventory position this period: every order placed, unless
        some orders only move stock inside the system (a serial chain's inner stages)."""
        return np.asarray(action, dtype=np.int64).sum(axis=1)

    def index_radix(self, spec: "InstanceSpec") -> int:
        """Largest value of a state coordinate other than the first that a state index must
        hold: one order (orders in transit, stock by age) unless the model says otherwise."""
        return max(s.cap_units for s in self.order_slots(spec))

    # ------------------------------------------------------------------ model: exact solver
    def exact_space(self, spec: "InstanceSpec") -> "ExactSpace":  # model
        """How the exact solver bounds, enumerates and widens this model's states."""
        raise NotImplementedError

    # ------------------------------------------------------------------ shared
    def describe(self) -> str:
        return f"{self.name}: {self.title}"


def as_actions(action: Any, k: int, batch: int) -> np.ndarray:
    """Orders as int64 [B, k] (a [B] vector is accepted for one order slot)."""
    a = np.asarray(action, dtype=np.int64)
    if a.ndim <= 1 and k == 1:
        return a.reshape(batch, 1)
    return a.reshape(batch, k)


def labels_text(labels: Sequence[str]) -> str:
    return ", ".join(f"{i}: {lab}" for i, lab in enumerate(labels))
