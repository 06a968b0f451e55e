"""The compiled batch simulator: replications x periods in one numba loop, the model's period
rules (`envs/models/<name>/rules.py`), the demand draw and, for the linear order rules of
`policy_kernels.py`, the policy too.

It gives what the numpy loop of `simulate.py` gives, bit for bit: the uniforms are drawn in
the same order (a block rng.random((T, R)) is T draws of rng.random(R) in a row), demand is the
same inverse CDF on the same cdf array (`Demand.from_uniforms`), costs are added per row in the
same order. Each replication runs all its periods of a block while its state sits in a small
local buffer, which is where the speed comes from. The driver is cached like the compiled step
(`envs/models/compiled.py`, which explains the `key`).
"""
from __future__ import annotations

from typing import Any, Callable

import numpy as np

from invbench.envs.models.compiled import covered, driver, jit, register

from .policy_kernels import LinearOrders, linear_orders

#: uniforms drawn per block (8 bytes each, 512 KiB): a replication walks down one column of it
BLOCK_VALUES = 1 << 16
#: entries of the inverse-CDF guide table (a start point for the exact search)
GUIDE = 256


def inverse_cdf(cdf: Any, guide: Any, u: float) -> int:  # pragma: no cover - compiled
    """Demand for uniform u: the first index with cdf > u (numpy's searchsorted, side right),
    capped at the last value; searched from the guide table's entry, up or down."""
    n = len(cdf)
    g = len(guide)
    i = guide[min(int(u * g), g - 1)]
    while i > 0 and cdf[i - 1] > u:
        i -= 1
    while i < n and cdf[i] <= u:
        i += 1
    return min(i, n - 1)


def _build_run(period: Callable[..., None], key: int) -> Any:
    from invbench.envs.models.nb_views import unmanaged

    def run(state, U, cdf, guide, ip, fp, W, level, reorder, cap, pack, ref, coef, seq, acc, t0, warm,
            discounted, discount, weight0, work, bs, ba, bn, bc, bf):  # pragma: no cover - compiled
        if key == 0:  # never true: `key` only keys numba's disk cache (envs/models/compiled.py)
            return
        R, n = state.shape
        T = U.shape[0]
        nc = acc.shape[1]
        k = len(level)
        # views without reference counts for the period call (envs/models/nb_views.py)
        s, a, nx, costs, flows = unmanaged(bs), unmanaged(ba), unmanaged(bn), unmanaged(bc), unmanaged(bf)
        ipu, fpu, w_ = unmanaged(ip), unmanaged(fp), unmanaged(work)
        for r in range(R):  # one replication through the whole block: its state stays in the cache
            for i in range(n):
                s[i] = state[r, i]
            w = weight0
            for t in range(T):
                # the order rule of policy_kernels.LinearOrders (written here, in the loop: as a
                # function of its own it was measured several times slower; again 2026-12-02 as
                # a registered inline="always" function shared with agents/rollout_kernels.py:
                # 4.5 -> 1.0x the numpy loop)
                for jj in range(k):
                    j = seq[jj]
                    f = 0
                    for i in range(n):
                        f += W[j, i] * s[i]
                    raw = level[j] - f
                    if ref[j] >= 0:
                        raw += coef[j] * a[ref[j]]
                    if f > reorder[j]:
                        raw = 0
                    o = min(max(raw, 0), cap[j])
                    a[j] = o if pack[j] == 1 else (o // pack[j]) * pack[j]  # integer division is slow
                d = inverse_cdf(cdf, guide, U[t, r])
                period(s, a, d, ipu, fpu, nx, costs, flows, w_)
                for i in range(n):
                    s[i] = nx[i]
                if discounted:
                    for c in range(nc):
                        acc[r, c] += w * costs[c]
                    w = w * discount
                elif t0 + t >= warm:
                    for c in range(nc):
                        acc[r, c] += costs[c]
            for i in range(n):
                state[r, i] = s[i]
    return jit(run)


def guide_table(cdf: np.ndarray) -> np.ndarray:
    return np.searchsorted(cdf, np.arange(GUIDE) / GUIDE, side="right").astype(np.int64)


def compiled_costs(spec: Any, policy: Any, state: np.ndarray, rng: np.random.Generator, steps: int, warmup: int,
                   discounted: bool, progress: bool = False) -> np.ndarray | None:
    """Cost per replication and named part, accumulated as `simulate` does ([R, parts]: summed
    after the warm-up, or discounted from period 0), or None when the model's rules do not
    cover `spec` or the policy is not a linear order rule. `state` [R, n] is advanced in place."""
    found = covered(spec)
    lin = linear_orders(policy, spec) if found is not None else None
    if found is None or lin is None:
        return None
    rules, p = found
    register(inverse_cdf)
    run = driver("simulate", rules, _build_run)
    R = len(state)
    cdf = np.ascontiguousarray(spec.demand.pmf().cdf())
    guide = guide_table(cdf)
    acc = np.zeros((R, len(rules.costs)))
    weight = 1.0
    block = max(1, min(steps, BLOCK_VALUES // R))
    bar = None
    if progress:
        from tqdm import tqdm
        bar = tqdm(total=steps, desc="simulate", unit="period", leave=False)
    for t0 in range(0, steps, block):
        T = min(block, steps - t0)
        U = rng.random((T, R))
        _call(run, state, U, cdf, guide, p, lin, acc, t0, warmup, discounted, spec.discount, weight,
              len(rules.flows))
        if discounted:
            for _ in range(T):  # the same products as the numpy loop's running weight
                weight *= spec.discount
        if bar is not None:
            bar.update(T)
    if bar is not None:
        bar.close()
    return acc


def _call(run: Any, state: np.ndarray, U: np.ndarray, cdf: np.ndarray, guide: np.ndarray, p: Any,
          lin: LinearOrders, acc: np.ndarray, t0: int, warmup: int, discounted: bool, discount: float,
          weight: float, nflows: int) -> None:
    n, k = state.shape[1], len(lin.level)
    buffers = (np.empty(max(p.work, 1), dtype=np.int64), np.empty(n, dtype=np.int64), np.zeros(k, dtype=np.int64),
               np.empty(n, dtype=np.int64), np.empty(acc.shape[1]), np.empty(nflows, dtype=np.int64))
    run(state, U, cdf, guide, p.ints, p.floats, lin.weights, lin.level, lin.reorder, lin.cap, lin.pack, lin.ref,
        lin.coef, lin.sequence, acc, t0, warmup, discounted, float(discount), weight, *buffers)
