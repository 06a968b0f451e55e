"""The rollout agent's candidates and targets for models with several order slots.

The candidate set per state stays small: the product of the slots' sizes when it has at most
`PRODUCT_CAP` members, else coordinate-wise candidates (one slot varied over its sizes while
the others keep the current policy's order). Either way each head j gets a value per size u of
slot j: the rollout cost of the candidate with that size (coordinate-wise), or the smallest
such cost over the candidates with that size (product set; the per-head argmin of these
min-marginals is the joint argmin).
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.spec import InstanceSpec

from .scaling import Scaling, deficit_rule, deficit_level

#: largest product of the slots' sizes tried in full
PRODUCT_CAP = 64


def use_product(scaling: Scaling) -> bool:
    return int(np.prod(scaling.slot_counts)) <= PRODUCT_CAP


def candidates(scaling: Scaling, current: np.ndarray) -> np.ndarray:
    """First orders [N, K, k] in units for states whose current orders are `current` [N, k]."""
    k, N = scaling.n_slots, len(current)
    if use_product(scaling):
        grid = np.stack(np.meshgrid(*[scaling.slot_units(j) for j in range(k)], indexing="ij"), axis=-1)
        return np.broadcast_to(grid.reshape(1, -1, k), (N, grid.size // k, k)).copy()
    blocks = []
    for j in range(k):
        sizes = scaling.slot_units(j)
        b = np.repeat(current[:, None, :], len(sizes), axis=1)
        b[:, :, j] = sizes[None, :]
        blocks.append(b)
    return np.concatenate(blocks, axis=1)


def head_values(scaling: Scaling, first: np.ndarray, q: np.ndarray) -> list[np.ndarray]:
    """Per slot j, values [N, n_j] of its sizes from candidate costs q [N, K] (see module doc)."""
    out, N = [], len(q)
    for j in range(scaling.n_slots):
        sizes = scaling.slot_units(j)
        idx = np.searchsorted(sizes, first[:, :, j])
        v = np.full((N, len(sizes)), np.inf)
        np.minimum.at(v, (np.repeat(np.arange(N), q.shape[1]), idx.ravel()), q.ravel())
        out.append(v)
    return out


def to_index(scaling: Scaling, orders: np.ndarray) -> np.ndarray:
    """Slot indices [B, k] of orders [B, k] in units (largest size not above the order)."""
    orders = np.asarray(orders, dtype=np.int64).reshape(-1, scaling.n_slots)
    return np.column_stack([np.clip(np.searchsorted(scaling.slot_units(j), orders[:, j], side="right") - 1, 0,
                                    scaling.slot_counts[j] - 1) for j in range(scaling.n_slots)])


def best_deficit_rule(spec: InstanceSpec, scaling: Scaling, seed: int) -> tuple[int, Any]:
    """The deficit rule's level with the lowest CRN cost, by a scan around the fractile level."""
    from invbench.experiments.simulate import simulate
    centre = deficit_level(spec)
    best = None
    for level in range(max(centre - 12, 0), centre + 4):
        act = deficit_rule(spec, level, scaling.slot_sizes)
        c = simulate(spec, act, replications=32, periods=600, warmup=100, seed=seed).cost
        if best is None or c < best[0]:
            best = (c, level)
    return best[1], deficit_rule(spec, best[1], scaling.slot_sizes)
