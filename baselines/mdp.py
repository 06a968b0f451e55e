"""The finite MDP of an instance, built from the model's step function.

Every (state, action) pair of the model's exact space is stepped against every demand value
with positive probability, in chunks, and the results weighted by the pmf: that *is* the
transition matrix and expected cost (`expectation.py` does the weighting, shared with exact
policy evaluation). Arrays follow QuantEcon's DiscreteDP shape: state-action pairs sorted by
state, a cost per pair and a sparse pair x state transition matrix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from invbench.envs.errors import BudgetError
from invbench.envs.models.exact_space import Bounds, ExactSpace, SizeEstimate
from invbench.envs.models.state_index import StateIndex

from .expectation import expected_step


class IndexedStates:
    """States held by a state index (`self.index`): what FiniteMDP and the matrix-free
    SplitMDP both offer the solver and the summaries."""

    index: StateIndex

    @property
    def states(self) -> np.ndarray:
        return self.index.states

    @property
    def n_states(self) -> int:
        return len(self.index)


@dataclass
class FiniteMDP(IndexedStates):
    """Arrays of one finite MDP. Pairs are contiguous per state: pairs of state s are
    pair_start[s] .. pair_start[s+1]-1, in increasing order size."""

    representation: str
    bounds: Bounds
    index: StateIndex
    pair_state: np.ndarray
    pair_action: np.ndarray  # [pairs, k] orders in units
    pair_start: np.ndarray
    cost_names: tuple[str, ...]
    cost_parts: np.ndarray  # [pairs, parts] expected cost per period, by named part
    P: sp.csr_matrix  # [pairs, states]
    clip_mass: np.ndarray  # [pairs] probability of leaving the space (clipped back into it)
    at_upper: np.ndarray  # [pairs] the order brings the position exactly to the upper bound
    truncation_mass: float  # demand tail probability dropped from the pmf
    start: int

    @property
    def n_pairs(self) -> int:
        return len(self.pair_state)

    @property
    def pair_order(self) -> np.ndarray:
        """Total units ordered per pair (the only order for one-slot models)."""
        return self.pair_action.sum(axis=1)

    @property
    def cost(self) -> np.ndarray:
        return self.cost_parts.sum(axis=1)

    @property
    def nbytes(self) -> int:
        return int(self.P.data.nbytes + self.P.indices.nbytes + self.P.indptr.nbytes
                   + self.cost_parts.nbytes + self.index.states.nbytes)


def check_budget(est: SizeEstimate, max_states: int, max_bytes: int) -> None:
    if est.states > max_states:
        raise BudgetError(f"exact solve: needs {est.describe()}; {est.states:,} states is over the state budget of "
                          f"{max_states:,} (raise max_states / --max-states, or shrink the instance)")
    if est.bytes > max_bytes:
        raise BudgetError(f"exact solve: needs {est.describe()}, over the memory budget of "
                          f"{max_bytes / 2**20:,.0f} MiB (raise max_memory_mb / --max-memory-mb, or shrink the instance)")


def build_mdp(space: ExactSpace, bounds: Bounds) -> FiniteMDP:
    """Step every (state, action, random inputs) of the space through the model; weight by
    their probability."""
    index = space.index(bounds)
    states = index.states
    pair_state, pair_action, pair_start, at_upper = space.pairs(states, bounds)
    ex = expected_step(space.step, states[pair_state], pair_action, space.outcomes(),
                       lambda nxt: space.clip(nxt, bounds), index.lookup, n_cols=len(states))
    P = ex.P
    costs = space.pair_costs(states, pair_state, pair_action, ex.costs)
    start = int(index.lookup(space.start_state())[0])
    return FiniteMDP(space.representation, bounds, index, pair_state, pair_action, pair_start,
                     ex.cost_names, costs, P, ex.clip_mass, at_upper, space.truncation_mass(), start)
