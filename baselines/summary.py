"""Readable summaries of an optimal policy table, for the CLI and reports."""
from __future__ import annotations

import numpy as np

from .exact import SolveResult, reachable_states


def policy_structure(result: SolveResult) -> dict:
    """For backorders, whether the optimum is an order-up-to / (s,S) rule, with s and S."""
    mdp = result.mdp
    if mdp is None:  # solved by a model's own exact method: the policy says what it is
        return {"kind": "analytic", "policy": result.policy.describe()}
    reach = reachable_states(mdp, _choice(result))
    states = mdp.states[reach]
    orders = result.policy.orders[reach].sum(axis=1)
    pos = states.sum(axis=1)
    out: dict = {"reachable_states": int(len(reach))}
    ordering = orders > 0
    if result.representation == "backorder_position" and ordering.any():
        s = int(pos[ordering].max())
        targets = np.unique(pos[ordering] + orders[ordering])
        q = result.policy.spec.case_pack
        no_order_above = not np.any(ordering & (pos > s))
        orders_below = bool(np.all(ordering[pos <= s]))
        if len(targets) == 1 and no_order_above and orders_below:
            S = int(targets[0])
            out.update(kind="base_stock" if s == S - 1 else "s_S", s=s, S=S)
        elif q > 1 and no_order_above and orders_below and targets.max() - targets.min() < q:
            out.update(kind="s_S_case_pack", s=s, S_range=[int(targets.min()), int(targets.max())])
        else:
            out.update(kind="other")
    else:
        out["kind"] = "state_dependent"
    return out


def _choice(result: SolveResult) -> np.ndarray:
    return result.choice


def summarize(result: SolveResult, max_rows: int = 12) -> list[str]:
    """A few lines saying what the optimal policy does in the states it actually visits."""
    info = policy_structure(result)
    if info["kind"] == "analytic":
        return [f"optimal policy: {info['policy']}"]
    lines = []
    kind = info.get("kind")
    if kind == "base_stock":
        lines.append(f"optimal policy: order up to S = {info['S']} (inventory position)")
    elif kind == "s_S":
        lines.append(f"optimal policy: (s, S) with s = {info['s']}, S = {info['S']} "
                     "(order up to S when the inventory position is <= s)")
    mdp = result.mdp
    reach = reachable_states(mdp, _choice(result))
    pos = mdp.states[reach].sum(axis=1)
    orders = result.policy.orders[reach].sum(axis=1)
    lines.append(f"reachable states under the optimal policy: {len(reach):,} of {mdp.n_states:,}")
    lines.append("inventory position -> optimal order (units), min..max over reachable states:")
    levels = np.unique(pos)
    if len(levels) > max_rows:
        levels = levels[np.linspace(0, len(levels) - 1, max_rows).astype(int)]
    for y in levels:
        o = orders[pos == y]
        rng = f"{o.min()}" if o.min() == o.max() else f"{o.min()}..{o.max()}"
        lines.append(f"  {int(y):>6} -> {rng}")
    if result.policy.orders.shape[1] > 1:
        lines.append("(several orders per period: the total is shown)")
    return lines
