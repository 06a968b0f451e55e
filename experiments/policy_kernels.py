"""The classical policies the compiled simulator runs without calling Python: order-up-to rules
on linear positions.

Every policy here orders, per slot j (in a fixed sequence),
    raw_j = level_j - w_j . state  (+ coef_j x the order of an earlier slot ref_j),
nothing when w_j . state > reorder_j, else raw_j clipped into [0, cap_j] and rounded down to a
multiple of pack_j. That covers base-stock, (s, S), capped base-stock and constant order on the
inventory position, the dual-sourcing index policies, and echelon and installation base-stock.
The positions w_j come from each policy's own position helpers applied to unit states (they are
linear), so they are not written again here; `tests/test_compiled_paths.py` checks that these
orders equal each policy's `act` on random states. Any other policy (tables, networks, PIL,
callables) is run as Python by the simulator, with the compiled step.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

#: "never": a reorder level no position reaches
NEVER = np.iinfo(np.int64).max // 4


@dataclass(frozen=True)
class LinearOrders:
    """The arrays the compiled order rule reads (module doc); one entry per order slot."""

    weights: np.ndarray  # int64 [k, n]
    level: np.ndarray  # int64 [k]
    reorder: np.ndarray  # int64 [k]
    cap: np.ndarray  # int64 [k]
    pack: np.ndarray  # int64 [k]
    ref: np.ndarray  # int64 [k], -1: none
    coef: np.ndarray  # int64 [k]
    sequence: np.ndarray  # int64 [k]: slots in the order they are computed

    def orders(self, states: np.ndarray) -> np.ndarray:
        """The same rule on numpy, [B, n] -> [B, k] (for tests and the Python path)."""
        states = np.asarray(states, dtype=np.int64)
        out = np.zeros((len(states), len(self.level)), dtype=np.int64)
        for j in self.sequence:
            f = states @ self.weights[j]
            raw = self.level[j] - f + (self.coef[j] * out[:, self.ref[j]] if self.ref[j] >= 0 else 0)
            raw = np.where(f > self.reorder[j], 0, raw)
            o = np.minimum(np.maximum(raw, 0), self.cap[j])
            out[:, j] = (o // self.pack[j]) * self.pack[j]
        return out


def _slots(spec: Any, weights: list[np.ndarray], level: list[int], *, reorder: list[int] | None = None,
           cap: list[int] | None = None, ref: list[int] | None = None, coef: list[int] | None = None,
           sequence: list[int] | None = None) -> LinearOrders:
    k = len(level)
    slots = spec.order_slots
    caps = [s.cap_units for s in slots]
    packs = [int(s.sizes_units[1] - s.sizes_units[0]) if len(s.sizes_units) > 1 else 1 for s in slots]
    a = lambda x, default: np.asarray(default if x is None else x, dtype=np.int64)  # noqa: E731
    return LinearOrders(np.asarray(np.stack(weights), dtype=np.int64), a(level, None),
                        a(reorder, [NEVER] * k), np.minimum(a(cap, caps), caps), a(None, packs),
                        a(ref, [-1] * k), a(coef, [0] * k), a(sequence, list(range(k))))


def _unit_states(spec: Any) -> np.ndarray:
    return np.eye(spec.state_dim, dtype=np.int64)


def _position(spec: Any) -> np.ndarray:
    from invbench.baselines.policies._common import inventory_position
    return inventory_position(_unit_states(spec))


def _dual_positions(spec: Any) -> tuple[np.ndarray, np.ndarray]:
    from invbench.baselines.policies._dual import positions
    return positions(_unit_states(spec), spec)


def _stage_sums(spec: Any) -> np.ndarray:
    from invbench.baselines.policies.echelon import stage_sums
    return stage_sums(spec, _unit_states(spec)).T  # [N, n]: stage j's own stock and transit


def _base_stock(pol: Any, spec: Any) -> LinearOrders:
    return _slots(spec, [_position(spec)], [pol.S])


def _s_S(pol: Any, spec: Any) -> LinearOrders:
    return _slots(spec, [_position(spec)], [pol.S], reorder=[pol.s])


def _capped_base_stock(pol: Any, spec: Any) -> LinearOrders:
    return _slots(spec, [_position(spec)], [pol.S], cap=[pol.r])


def _constant_order(pol: Any, spec: Any) -> LinearOrders:
    return _slots(spec, [0 * _position(spec)], [pol.r])


def _dual_index(pol: Any, spec: Any) -> LinearOrders:
    ip_e, ip_r = _dual_positions(spec)  # the expedited order first; the regular one counts it too
    return _slots(spec, [ip_r, ip_e], [pol.S_r, pol.S_e], ref=[1, -1], coef=[-1, 0], sequence=[1, 0])


def _capped_dual_index(pol: Any, spec: Any) -> LinearOrders:
    ip_e, ip_r = _dual_positions(spec)
    return _slots(spec, [ip_r, ip_e], [pol.S_r, pol.S_e], cap=[pol.r, spec.order_cap_units])


def _tailored_base_surge(pol: Any, spec: Any) -> LinearOrders:
    ip_e, _ = _dual_positions(spec)
    return _slots(spec, [0 * ip_e, ip_e], [pol.r, pol.S_e])


def _single_source(pol: Any, spec: Any) -> LinearOrders:
    _, ip_r = _dual_positions(spec)  # every unit in transit counts, from either supplier
    levels = [pol.S, 0] if pol.slot == 0 else [0, pol.S]
    weights = [ip_r, 0 * ip_r] if pol.slot == 0 else [0 * ip_r, ip_r]
    return _slots(spec, weights, levels)


def _echelon(pol: Any, spec: Any) -> LinearOrders:
    own = _stage_sums(spec)
    return _slots(spec, list(np.cumsum(own, axis=0)), list(pol.s))


def _installation(pol: Any, spec: Any) -> LinearOrders:
    own = _stage_sums(spec)  # stage j orders up to r_j on its own stock and transit plus the order from below
    N = len(own)
    return _slots(spec, list(own), list(pol.r), ref=[-1] + list(range(N - 1)), coef=[0] + [1] * (N - 1))


def _converters() -> dict[type, Callable[[Any, Any], LinearOrders]]:
    from invbench.baselines.policies import (BaseStockPolicy, CappedBaseStockPolicy, ConstantOrderPolicy,
                                             EchelonBaseStockPolicy, InstallationBaseStockPolicy, SSPolicy,
                                             ShangSongPolicy)
    from invbench.baselines.policies.capped_dual_index import CappedDualIndexPolicy
    from invbench.baselines.policies.dual_index import DualIndexPolicy
    from invbench.baselines.policies.single_source import SingleExpeditedPolicy, SingleRegularPolicy
    from invbench.baselines.policies.tailored_base_surge import TailoredBaseSurgePolicy
    return {BaseStockPolicy: _base_stock, SSPolicy: _s_S, CappedBaseStockPolicy: _capped_base_stock,
            ConstantOrderPolicy: _constant_order, DualIndexPolicy: _dual_index,
            CappedDualIndexPolicy: _capped_dual_index, TailoredBaseSurgePolicy: _tailored_base_surge,
            SingleRegularPolicy: _single_source, SingleExpeditedPolicy: _single_source,
            EchelonBaseStockPolicy: _echelon, ShangSongPolicy: _echelon, InstallationBaseStockPolicy: _installation}


def linear_orders(policy: Any, spec: Any) -> LinearOrders | None:
    """The policy as a linear order rule when it is one of the kinds above (its exact class, so
    a subclass that changes `act` is not mistaken for its parent) and built for this very
    instance, or when it has `linear_orders(spec)` (giving a LinearOrders or None); None otherwise."""
    conv = _converters().get(type(policy))
    if conv is None:  # a policy that states its own linear form (the rollout agent's start rule)
        own = getattr(policy, "linear_orders", None)
        return own(spec) if callable(own) else None
    if getattr(policy, "spec", None) != spec:
        return None
    return conv(policy, spec)
