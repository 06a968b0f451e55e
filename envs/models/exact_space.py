"""How the exact solver sees a model: a finite state space, its bounds, and how they widen.

`ExactSpace` is the model-side half of the solver. The default implementation covers the
"sum-bounded" spaces (every coordinate >= 0, inventory position <= an upper bound; orders keep
the position after ordering within the bound), which fits lost sales and perishable goods; a
model overrides what differs (the backorder model solves on the inventory position alone).
The generic half (`baselines/mdp.py`) steps every (state, action, demand) through `step` and
never asks which model it holds.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.random_inputs import JointOutcomes, period_outcomes

from .state_index import StateCodec, StateIndex

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP
    from invbench.envs.demand import DiscretePmf
    from invbench.envs.spec import InstanceSpec
    from .base import InventoryModel, Outcome
    from .demand_split import DemandSplit


@dataclass(frozen=True)
class Bounds:
    """upper: largest inventory position after ordering; lower: smallest stock level (signed)."""

    upper: int
    lower: int = 0

    def to_dict(self) -> dict[str, int]:
        return {"upper": self.upper, "lower": self.lower}


@dataclass(frozen=True)
class SizeEstimate:
    states: int
    pairs: int
    transitions: int
    bytes: int

    def to_dict(self) -> dict[str, int]:
        return {"states": self.states, "pairs": self.pairs, "transitions": self.transitions, "bytes": self.bytes}

    def describe(self) -> str:
        return (f"{self.states:,} states, {self.pairs:,} state-order pairs, about "
                f"{self.bytes / 2**20:,.0f} MiB")


#: Bytes per stored transition (float64 value + int32 column) plus per-pair overhead, and the
#: peak while building and iterating (measured, experiments/perf/scaling.py).
BYTES_PER_NNZ = 12
BYTES_PER_PAIR = 64
PEAK_BYTES_PER_NNZ = 56


def simplex_states(n: int, upper: int) -> np.ndarray:
    """All x in Z_+^n with sum(x) <= upper, as an int64 array [S, n].

    Rows come in the order of a state index (`state_index.py`: the last entry most significant,
    the first least), so indexing them needs no sort."""
    out = np.empty((count_simplex_states(n, upper), n), dtype=np.int64)
    if len(out) and n:
        from .simplex_fill import fill_simplex  # compiled on first use; keeps numba out of imports
        fill_simplex(out, upper)
    return out


def count_simplex_states(n: int, upper: int) -> int:
    return math.comb(upper + n, n) if upper >= 0 else 0


class ExactSpace:
    """Sum-bounded state space of a one-order model; see the module docstring."""

    representation = "full"

    def __init__(self, model: "InventoryModel", spec: "InstanceSpec") -> None:
        self.model = model
        self.spec = spec

    # ---------------------------------------------------------------- bounds
    def initial_bounds(self) -> Bounds:  # model
        raise NotImplementedError

    def widen(self, b: Bounds, up: bool, down: bool) -> Bounds:
        """A quarter of the width (at least a case pack) in each direction that binds."""
        step = max(2, self.spec.case_pack, int(math.ceil(0.25 * max(b.upper - b.lower, 4))))
        return Bounds(b.upper + (step if up else 0), b.lower - (step if down else 0))

    # ---------------------------------------------------------------- states and pairs
    @property
    def dim(self) -> int:
        return self.model.state_dim(self.spec)

    def states(self, b: Bounds) -> np.ndarray:
        return simplex_states(self.dim, b.upper)

    def codec(self, b: Bounds) -> StateCodec:
        return StateCodec(self.dim, max(self.spec.order_cap_units, b.upper - min(b.lower, 0)))

    def index(self, b: Bounds) -> StateIndex:
        return StateIndex(self.codec(b), self.states(b))

    def start_state(self) -> np.ndarray:
        return self.model.start_state(self.spec)

    def pairs(self, states: np.ndarray, b: Bounds) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(pair_state, pair_action [P, 1], pair_start, at_upper): all legal orders keeping the
        position after ordering <= b.upper (ordering nothing is always allowed), state-major."""
        position = self.model.position(self.spec, states)
        sizes = self.model.order_slots(self.spec)[0].sizes_units
        room = b.upper - position
        n_orders = np.maximum(np.searchsorted(sizes, room, side="right"), 1)
        pair_start = np.concatenate([[0], np.cumsum(n_orders)]).astype(np.int64)
        pair_state = np.repeat(np.arange(len(states)), n_orders)
        pair_order = sizes[np.arange(pair_start[-1]) - pair_start[pair_state]]
        at_upper = (position[pair_state] + pair_order) == b.upper
        return pair_state, pair_order[:, None], pair_start, at_upper

    # ---------------------------------------------------------------- dynamics on the space
    def demand_pmf(self) -> "DiscretePmf":
        return self.spec.demand.pmf()

    def outcomes(self) -> JointOutcomes:
        """Every value of the period's random inputs (demand and any other the model declares,
        e.g. a lead-time cut-off) with its probability: what the MDP build sums over."""
        return period_outcomes(self.spec, self.demand_pmf().normalized())

    def extra_outcomes(self) -> int:
        """Joint values of the random inputs besides demand (1 when there are none)."""
        n = 1
        for law in self.model.random_inputs(self.spec):
            n *= len(law.support()[0])
        return n

    def step(self, states: np.ndarray, actions: np.ndarray, demand: np.ndarray,
             **inputs: np.ndarray) -> tuple[np.ndarray, "Outcome"]:
        return self.model.step(self.spec, states, actions, demand, **inputs)

    def clip(self, nxt: np.ndarray, b: Bounds) -> np.ndarray:
        """Keep next states inside the space (in place); returns where that changed a row."""
        return np.zeros(len(nxt), dtype=bool)

    def pair_costs(self, states: np.ndarray, pair_state: np.ndarray, pair_action: np.ndarray,
                   costs: np.ndarray) -> np.ndarray:
        """Expected cost parts per pair [P, parts]; a reduced space may replace them."""
        return costs

    def truncation_mass(self) -> float:
        return float(self.spec.demand.pmf().truncation_mass)

    # ---------------------------------------------------------------- budget and checks
    def estimate(self, b: Bounds) -> SizeEstimate:
        """Generic count: states by the simplex formula, pairs from the orders that fit."""
        n, q = self.dim, self.spec.case_pack
        support = int(np.count_nonzero(self.demand_pmf().probs))
        states = count_simplex_states(n, b.upper)
        pairs = count_simplex_states(n + 1, b.upper) // q + states
        transitions = pairs * support
        return SizeEstimate(states, pairs, transitions, transitions * BYTES_PER_NNZ + pairs * BYTES_PER_PAIR)

    def fast_build(self, b: Bounds) -> "FiniteMDP | None":
        """A structured build giving the same MDP as the generic one, or None."""
        return None

    def demand_split(self) -> "DemandSplit | None":
        """Opt-in: how `step` splits into a fixed post-decision part and demand acting on the
        first coordinate (`demand_split.py`), so the solver needs no transition matrix; None
        where that does not hold for this instance."""
        return None

    def binding(self, mdp: "FiniteMDP", chosen: np.ndarray) -> tuple[bool, bool]:
        """Whether the bounds bind on the chosen pairs of reachable states: (upper, lower).

        Upper binds where the position after ordering sits on the bound while a larger legal
        order existed; lower where probability was clipped back into the space.
        """
        orders = mdp.pair_action[chosen].sum(axis=1)
        q, cap = self.spec.case_pack, self.spec.order_cap_units
        up = bool(np.any(mdp.at_upper[chosen] & (orders > 0) & (orders + q <= cap)))
        down = bool(np.any(mdp.clip_mass[chosen] > 1e-12))
        return up, down

    # ---------------------------------------------------------------- the optimal table
    def table_keys(self, obs: np.ndarray) -> np.ndarray:
        """Solver states for env states (identity here; a reduced space maps them)."""
        return obs

    def table_orders(self, index: StateIndex, orders: np.ndarray, b: Bounds, obs: np.ndarray) -> np.ndarray:
        """Orders of the optimal table for a batch of observations.

        A state whose position exceeds the upper bound orders nothing: the bound is an upper
        limit on the optimal position after ordering. Any other state off the table is an error.
        """
        pos = index.lookup(self.table_keys(obs))
        out = np.zeros((len(obs),) + orders.shape[1:], dtype=np.int64)
        found = pos >= 0
        out[found] = orders[pos[found]]
        above = self.model.position(self.spec, obs) > b.upper
        missing = ~found & ~above
        if np.any(missing):
            bad = obs[np.argmax(missing)]
            raise SpecError(f"state: {list(map(int, bad))} is outside the optimal table "
                            f"(states with entries >= 0 and position <= {b.upper})")
        return out


def eoq_room(spec: "InstanceSpec", holding: float | None = None) -> int:
    """Extra room for batch ordering when a fixed cost makes large orders pay (EOQ scale)."""
    if spec.fixed_order_cost <= 0:
        return 0
    h = max(spec.holding_cost if holding is None else holding, 1e-9)
    return int(math.ceil(math.sqrt(2.0 * spec.fixed_order_cost * spec.demand.mean / h)))

