"""The periodic-review backorder model: unmet demand waits, at a cost per unit per period."""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.newsvendor import lead_time_demand_pmf, order_up_to_level
from invbench.envs.random_inputs import JointOutcomes

from ..base import InventoryModel, Outcome
from ..demand_split import DemandSplit, fixed_lead_time, pipeline_split
from ..exact_space import (Bounds, ExactSpace, SizeEstimate, BYTES_PER_NNZ, BYTES_PER_PAIR,
                           count_simplex_states, eoq_room, simplex_states)
from ..pipeline import layout_labels, ordering_cost, receive
from .. import random_lead_time as rlt
from ..state_index import StateCodec, StateIndex
from .lead_time_cost import lead_time_cost
from .rules import RULES

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


class BackorderModel(rlt.RandomLeadTimeHooks, InventoryModel):
    name = "backorder"
    env_id = "invbench/Backorder-v0"
    env_entry = "invbench.envs.models.backorder.env:BackorderEnv"
    title = "single item, backorders, fixed or random lead time"
    timing = (
        "As for lost sales, but demand that cannot be met at once is backordered and filled from "
        "later deliveries; the state's first entry is the net inventory (on-hand minus backorders, "
        "negative when backorders wait). Each unit backordered at the end of a period costs "
        "`shortage_cost`; end-of-period on-hand stock costs `holding_cost` per unit. A random lead "
        "time works as for lost sales (cut-off A, orders never cross; `crossing = true`: drawn per "
        "order, simulation only); the net inventory at the end of a period is then the position "
        "after ordering V periods earlier minus the demand of those V + 1 periods, with V "
        "distributed as the lead time, so base-stock is optimal (Kaplan 1970).")
    stock_then_pipeline = True
    random_lead_time = True
    shortfall = "backordered"
    rules = RULES
    signed_level = True
    departing = ()  # the position falls by the whole demand, met now or later
    example = {"lead_time": 1, "holding_cost": 1.0, "shortage_cost": 9.0, "fixed_order_cost": 5.0,
               "demand": {"distribution": "poisson", "mean": 2.0}}
    variants = {"random_lead_time": {**example, "lead_time": {"pmf": [0.3, 0.4, 0.3]}}}

    def units_out(self, outcome: Outcome, demand: np.ndarray) -> np.ndarray:
        return np.asarray(demand, dtype=np.int64)

    def backorder_twin(self, spec: "InstanceSpec") -> "InstanceSpec":
        return spec

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        return layout_labels(spec, "net inventory (on-hand - backorders) after the receipt"
                             if spec.lead_time_law is None else "net inventory (on-hand - backorders)")

    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray, **inputs: np.ndarray) -> tuple[np.ndarray, Outcome]:
        if spec.lead_time_law is None and not inputs:
            return RULES.apply(spec, state, action, demand)  # the rules: rules.py (also compiled)
        # a random lead time: the receipt by the cut-off (random_lead_time.py), then the same accounting
        r = receive(spec, state, action, demand, inputs)
        end = r.available - r.demand
        # Sales: this period's demand met at once from stock (the fill); the rest waits.
        sales = np.minimum(np.maximum(r.available, 0), r.demand)
        backordered = np.maximum(-end, 0)
        nxt, received = r.advance(end)
        costs = {"holding": spec.holding_cost * np.maximum(end, 0), "shortage": spec.shortage_cost * backordered,
                 "ordering": ordering_cost(r.order, spec.unit_order_cost, spec.fixed_order_cost)}
        return nxt, Outcome(costs, {"sales": sales, "backordered": backordered, "end_level": end,
                                    "received": received, **r.flows})

    def exact_space(self, spec: "InstanceSpec", full_pipeline: bool = False) -> ExactSpace:
        # Random lead time, discounted: the position reduction is for the average cost only.
        if full_pipeline or (spec.lead_time_law is not None and spec.discount < 1):
            return BackorderFullSpace(self, spec)
        return BackorderPositionSpace(self, spec)


def _initial_bounds(spec: "InstanceSpec") -> Bounds:
    """The optimal order-up-to level lies within EOQ-scale room above the minimiser of the
    one-period lead-time cost, and the reorder level within that room below it; one period of
    maximal demand below that is as low as the position can fall. A starting point only:
    `exact.solve` verifies it after solving and widens it."""
    q = spec.case_pack
    base, room = order_up_to_level(spec), eoq_room(spec)
    dmax = spec.demand.pmf().support_max
    return Bounds(upper=base + 2 * room + q + 1, lower=min(base - 2 * room - dmax - q - 1, -1))


class BackorderPositionSpace(ExactSpace):
    """The inventory position y in [lower, upper] is a sufficient state (Karlin & Scarf 1958;
    Zipkin 2000, from memory): the order placed now meets demand over L + 1 periods, so the cost
    charged to it is G(y + a), the lead-time cost, and y moves by the order and one demand."""

    representation = "backorder_position"

    def initial_bounds(self) -> Bounds:
        return _initial_bounds(self.spec)

    @property
    def dim(self) -> int:
        return 1

    def states(self, b: Bounds) -> np.ndarray:
        return np.arange(b.lower, b.upper + 1, dtype=np.int64)[:, None]

    def codec(self, b: Bounds) -> StateCodec:
        return StateCodec(1, max(self.spec.order_cap_units, b.upper - min(b.lower, 0)))

    def start_state(self) -> np.ndarray:
        return np.zeros((1, 1), dtype=np.int64)

    def step(self, states: np.ndarray, actions: np.ndarray, demand: np.ndarray):
        once = self.spec.with_(lead_time=0)
        return self.model.step(once, states, actions, demand)

    def outcomes(self) -> JointOutcomes:
        """The position moves by the order and one period's demand alone, whatever the lead time."""
        return JointOutcomes.of_demand(self.demand_pmf().normalized())

    def clip(self, nxt: np.ndarray, b: Bounds) -> np.ndarray:
        below = nxt[:, 0] < b.lower
        nxt[:, 0] = np.maximum(nxt[:, 0], b.lower)
        return below

    def pair_costs(self, states, pair_state, pair_action, costs):
        spec = self.spec
        y = states[pair_state, 0] + pair_action[:, 0]
        # discounted: the cost of period t + L, seen from t (fixed L; a random lead time is
        # solved on the full space when discounted, see BackorderModel.exact_space)
        beta_l = 1.0 if spec.discount == 1 else spec.discount ** spec.lead_time
        g = lead_time_cost(spec, y) * beta_l
        costs[:, 0] = lead_time_cost(spec.with_(shortage_cost=0.0), y) * beta_l
        costs[:, 1] = g - costs[:, 0]
        return costs

    def truncation_mass(self) -> float:
        spec = self.spec
        return float(max(lead_time_demand_pmf(spec).truncation_mass,
                         spec.demand.pmf().truncation_mass))

    def estimate(self, b: Bounds) -> SizeEstimate:
        q, cap = self.spec.case_pack, self.spec.order_cap_units
        support = int(np.count_nonzero(self.demand_pmf().probs))
        states = b.upper - b.lower + 1
        pairs = sum(min(cap, b.upper - y) // q + 1 for y in range(b.lower, b.upper + 1))
        transitions = pairs * support
        return SizeEstimate(states, pairs, transitions, transitions * BYTES_PER_NNZ + pairs * BYTES_PER_PAIR)

    def demand_split(self) -> DemandSplit | None:
        """The position moves as a zero-lead-time net inventory: order and stock meet demand."""
        return None if fixed_lead_time(self.spec) is None else pipeline_split(0, 1)

    def table_keys(self, obs: np.ndarray) -> np.ndarray:
        return obs.sum(axis=1, keepdims=True)

    def table_orders(self, index: StateIndex, orders: np.ndarray, b: Bounds, obs: np.ndarray) -> np.ndarray:
        """Off the table: above the upper bound order nothing (the bound limits the optimal
        position after ordering); below the lower bound order what the lowest state orders plus
        the shortfall, in whole packs."""
        y = self.table_keys(obs)[:, 0]
        lo, hi = b.lower, b.upper
        out = orders[np.clip(y, lo, hi) - lo, 0].copy()
        below = y < lo
        q = self.spec.case_pack
        out[below] += -((y[below] - lo) // q) * q
        out[y > hi] = 0
        return np.minimum(out, self.spec.order_cap_units)[:, None]


class BackorderFullSpace(ExactSpace):
    """The full pipeline state (net inventory >= lower, position <= upper), to test the
    reduction to the inventory position; far larger."""

    representation = "backorder_full"

    def initial_bounds(self) -> Bounds:
        return _initial_bounds(self.spec)

    def states(self, b: Bounds) -> np.ndarray:
        n, span = self.dim, b.upper - b.lower
        pipes = simplex_states(n - 1, span) if n > 1 else np.zeros((1, 0), dtype=np.int64)
        reps = span - pipes.sum(axis=1) + 1
        idx = np.repeat(np.arange(len(pipes)), reps)
        x0 = b.lower + np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
        return np.column_stack([x0, pipes[idx]])

    def clip(self, nxt: np.ndarray, b: Bounds) -> np.ndarray:
        below = nxt[:, 0] < b.lower
        nxt[:, 0] = np.maximum(nxt[:, 0], b.lower)
        return below

    def estimate(self, b: Bounds) -> SizeEstimate:
        n, q, span = self.dim, self.spec.case_pack, b.upper - b.lower
        support = int(np.count_nonzero(self.demand_pmf().probs)) * self.extra_outcomes()
        states = count_simplex_states(n, span)
        pairs = count_simplex_states(n + 1, span) // q + states
        transitions = pairs * support
        return SizeEstimate(states, pairs, transitions, transitions * BYTES_PER_NNZ + pairs * BYTES_PER_PAIR)

    def demand_split(self) -> DemandSplit | None:
        """Demand meets the net inventory only; the pipeline moves as `pipeline.advance` says."""
        L = fixed_lead_time(self.spec)
        return None if L is None else pipeline_split(L, self.dim)
