"""Average-cost LP of a finite MDP, solved with SciPy's HiGHS: a cross-check for tiny instances.

max g  s.t.  g + h(s) - sum_s' P(s'|s,a) h(s') <= c(s,a)  for every pair, h(start) = 0
(Puterman 1994, sec. 8.8, unichain case).
"""
from __future__ import annotations

import time

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog

from invbench.envs.errors import BudgetError

from .iteration import IterationOutcome, _segment_argmin
from .mdp import FiniteMDP

LP_MAX_STATES = 5000


def solve_average_lp(mdp: FiniteMDP) -> IterationOutcome:
    if mdp.n_states > LP_MAX_STATES:
        raise BudgetError(f"lp: {mdp.n_states:,} states, the LP cross-check is for <= {LP_MAX_STATES:,}")
    t0 = time.perf_counter()
    S, M = mdp.n_states, mdp.n_pairs
    own = sp.csr_matrix((np.ones(M), (np.arange(M), mdp.pair_state)), shape=(M, S))
    A_h = own - mdp.P
    A = sp.hstack([sp.csr_matrix(np.ones((M, 1))), A_h], format="csr")
    c_obj = np.zeros(S + 1)
    c_obj[0] = -1.0  # maximise g
    bounds = [(None, None)] * (S + 1)
    bounds[1 + mdp.start] = (0.0, 0.0)
    res = linprog(c_obj, A_ub=A, b_ub=mdp.cost, bounds=bounds, method="highs")
    if res.status != 0:
        raise RuntimeError(f"lp: HiGHS did not solve the LP ({res.message})")
    g = float(res.x[0])
    h = res.x[1:]
    _, choice = _segment_argmin(mdp.cost + mdp.P @ h, mdp.pair_start)
    return IterationOutcome(g, g, g, h, choice, int(getattr(res, "nit", 0) or 0), time.perf_counter() - t0, True)
