"""Compiled loops of the matrix-free solver (`split_mdp.py`): the tables of a space, per-pair
facts and reachability, all read from small tables instead of a matrix.

Layout they share. States sit in the order of the state index, in *blocks*: the states of a
block share every entry but the stock level, which runs lo .. hi over consecutive positions
(blk rows: start position, lo, hi, sum of the other entries). A *combo* is (block, order j)
where j is legal for the block's lowest stock (cmb rows: j, next block, received units r, avail
offset): its states x0 = lo .. top have the stock avail v = x0 + offset to meet demand, and
after demand d the next state is block zb with stock max(max(v - d, f) + r, lower) = max(v - d
+ r, kf), kf = max(f + r, lower), where f is the floor of the end stock (0 under lost sales,
none under backorders) and lower the space's least stock level. Orders are legal while
position + total <= upper, and the first order (nothing) always.
The Bellman sweep itself is in `split_sweep.py`.
"""
from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def _search(sorted_keys, key):
    """Position of key in sorted_keys, or -1."""
    lo, hi = 0, len(sorted_keys)
    while lo < hi:
        mid = (lo + hi) // 2
        if sorted_keys[mid] < key:
            lo = mid + 1
        else:
            hi = mid
    if lo < len(sorted_keys) and sorted_keys[lo] == key:
        return lo
    return -1


@njit(cache=True)
def combo_counts(blk, totals, upper):
    """Orders legal at each block's lowest stock (at least the first)."""
    counts = np.empty(blk.shape[0], dtype=np.int64)
    for b in range(blk.shape[0]):
        c = 1
        while c < len(totals) and blk[b, 1] + blk[b, 3] + totals[c] <= upper:
            c += 1
        counts[b] = c
    return counts


@njit(cache=True)
def fill_combos(cmb, start, blk, blk_rest, blk_key, actions, totals, avail_w, recv_w, rest_w, radix, upper):
    """Rows of cmb (orders ascending per block); returns the avail range the combos need and
    how many led to a next block missing from the space. u = [rest entries, order]."""
    nb, m = blk_rest.shape
    k = actions.shape[1]
    vmin, vmax, missing = np.iinfo(np.int64).max, np.iinfo(np.int64).min, 0
    u = np.empty(m + k, dtype=np.int64)
    for b in range(nb):
        u[:m] = blk_rest[b]
        for idx in range(start[b], start[b + 1]):
            j = idx - start[b]
            u[m:] = actions[j]
            key = 0
            ok = True
            for t in range(m - 1, -1, -1):
                z = 0
                for i in range(m + k):
                    z += rest_w[t, i] * u[i]
                if z < 0 or z >= radix:
                    ok = False
                key = key * radix + z
            zb = _search(blk_key, key) if ok else -1
            if zb < 0:
                missing += 1
            r, voff = 0, 0
            for i in range(m + k):
                r += recv_w[i] * u[i]
                voff += avail_w[i] * u[i]
            cmb[idx, 0] = j
            cmb[idx, 1] = zb
            cmb[idx, 2] = r
            cmb[idx, 3] = voff
            top = blk[b, 2] if j == 0 else min(blk[b, 2], upper - blk[b, 3] - totals[j])
            vmin = min(vmin, blk[b, 1] + voff)
            vmax = max(vmax, top + voff)
    return vmin, vmax, missing


@njit(cache=True)
def pair_counts(out, blk, totals, upper):
    """out[1 + s] = legal orders of state s (at least one), in state order."""
    for b in range(blk.shape[0]):
        for x0 in range(blk[b, 1], blk[b, 2] + 1):
            room = upper - blk[b, 3] - x0
            c = 1
            while c < len(totals) and totals[c] <= room:
                c += 1
            out[1 + blk[b, 0] + x0 - blk[b, 1]] = c


@njit(cache=True)
def _top(b, j, blk, totals, upper):
    """Highest stock level of block b at which order j is legal."""
    return blk[b, 2] if j == 0 else min(blk[b, 2], upper - blk[b, 3] - totals[j])


@njit(cache=True)
def count_out_of_space(blk, cmb_start, cmb, totals, upper, lower, floor, p):
    """Combos with a next stock level outside the next block (the bounds do not hold the chain)."""
    dmin = 0
    while p[dmin] == 0:
        dmin += 1
    bad = 0
    for b in range(blk.shape[0]):
        for c in range(cmb_start[b], cmb_start[b + 1]):
            j, zb, r, voff = cmb[c, 0], cmb[c, 1], cmb[c, 2], cmb[c, 3]
            kf = max(floor + r, lower)
            k_hi = max(_top(b, j, blk, totals, upper) + voff - dmin + r, kf)
            if kf < blk[zb, 1] or k_hi > blk[zb, 2]:
                bad += 1
    return bad


@njit(cache=True)
def unit_starts(blk_rest, free, cmb_start):
    """Units: runs of consecutive blocks equal in every entry but the `free` ones (those feeding
    only what is received). Returns (first block of each unit and the end, orders per unit)."""
    nb, m = blk_rest.shape
    starts = np.empty(nb + 1, dtype=np.int64)
    nu = 0
    for b in range(nb):
        same = b > 0
        for i in range(m):
            if not free[i] and blk_rest[b, i] != blk_rest[b - 1, i]:
                same = False
        if not same:
            starts[nu] = b
            nu += 1
    starts[nu] = nb
    orders = np.zeros(nu, dtype=np.int64)
    for u in range(nu):
        for b in range(starts[u], starts[u + 1]):
            orders[u] = max(orders[u], cmb_start[b + 1] - cmb_start[b])
    return starts[:nu + 1].copy(), orders


@njit(cache=True)
def fill_unit_orders(uo, uo_start, starts, blk, cmb_start, cmb, totals, upper, lower, floor, n_demand):
    """uo rows per (unit, order j): next block, lowest and highest y = avail + received, lowest
    floor kf. Returns (scratch size of the sweep, number of (unit, order) whose blocks do not
    share one next block and avail offset)."""
    s_len, bad = 1, 0
    for u in range(len(starts) - 1):
        b0, b1 = starts[u], starts[u + 1]
        for j in range(uo_start[u + 1] - uo_start[u]):
            zb, voff, ylo, yhi, kfmin = -1, 0, 0, 0, 0
            for b in range(b0, b1):
                c = cmb_start[b] + j
                if c >= cmb_start[b + 1]:
                    continue
                top = _top(b, j, blk, totals, upper)
                y0, y1 = blk[b, 1] + cmb[c, 3] + cmb[c, 2], top + cmb[c, 3] + cmb[c, 2]
                kf = max(floor + cmb[c, 2], lower)
                if zb < 0:
                    zb, voff, ylo, yhi, kfmin = cmb[c, 1], cmb[c, 3], y0, y1, kf
                elif cmb[c, 1] != zb or cmb[c, 3] != voff:
                    bad += 1
                ylo, yhi, kfmin = min(ylo, y0), max(yhi, y1), min(kfmin, kf)
                s_len = max(s_len, top - blk[b, 1] + 1)
            row = uo_start[u] + j
            uo[row, 0], uo[row, 1], uo[row, 2], uo[row, 3] = zb, ylo, yhi, kfmin
            # the sweep's running sums: rows y - m - kfmin of n_demand - 1 entries, and one per y
            s_len = max(s_len, (yhi - kfmin + 1) * (n_demand - 1) + 1, yhi - ylo + 1)
    return s_len, bad


@njit(cache=True)
def _locate(s, j, blk, cmb_start):
    """(block, stock level, combo) of state s with order j."""
    lo_b, hi_b = 0, blk.shape[0]
    while hi_b - lo_b > 1:  # last block starting at or before s
        mid = (lo_b + hi_b) // 2
        if blk[mid, 0] <= s:
            lo_b = mid
        else:
            hi_b = mid
    return lo_b, blk[lo_b, 1] + s - blk[lo_b, 0], cmb_start[lo_b] + j


@njit(cache=True)
def clip_mass(states, orders, blk, cmb_start, cmb, lower, floor, p):
    """Probability that the next stock level was raised to `lower` (clipped), per pair."""
    out = np.zeros(len(states))
    for i in range(len(states)):
        b, x0, c = _locate(states[i], orders[i], blk, cmb_start)
        v, r = x0 + cmb[c, 3], cmb[c, 2]
        for d in range(len(p)):
            if max(v - d, floor) + r < lower:
                out[i] += p[d]
    return out


@njit(cache=True)
def reachable(seen, queue, choice, start, blk, cmb_start, cmb, lower, floor, p):
    """States reachable from `start` when state s places order choice[s] (seen: all False,
    queue: room for every state), sorted."""
    queue[0] = start
    seen[start] = True
    head, tail = 0, 1
    while head < tail:
        s = queue[head]
        head += 1
        b, x0, c = _locate(s, choice[s], blk, cmb_start)
        zb, r, v = cmb[c, 1], cmb[c, 2], x0 + cmb[c, 3]
        for d in range(len(p)):
            if p[d] > 0:
                nxt = blk[zb, 0] + max(max(v - d, floor) + r, lower) - blk[zb, 1]
                if not seen[nxt]:
                    seen[nxt] = True
                    queue[tail] = nxt
                    tail += 1
    return np.sort(queue[:tail])
