"""The Bellman sweep of the matrix-free solver: compiled loops over the tables of
`split_mdp.py` (layout in `split_kernels.py`).

Work goes by *units*: runs of consecutive blocks whose states differ only in entries that feed
nothing but the units received next period (lost sales: the order arriving next period). For
one order j, every block of a unit leads to the same next block z, so the expectation over
demand is shared: with y = v + r (avail plus received) and kf = max(f + r, lower) the next stock
is max(y - d, kf), and
    E h = S(y, min(m, D)) + P(demand > m) h(z, kf),   m = y - kf,
    S(y, m) = sum over d <= m of p(d) h(z, y - d),
one running sum per y serving every (v, r) on that diagonal. Each unit writes only its own
states, so the threaded sweep gives the same numbers as the plain one.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

#: Pieces the units are cut into for the threads.
CHUNKS = 256


@njit(cache=True)
def _fill(h, T, F, zs, ylo, yhi, kfmin, p, dmin):
    """T[(y - m - kfmin) * D + m] = S(y, m) for m < D, F[y - ylo] = S(y, D): the running sums of
    one next block, stored so that the states of one block read them consecutively. Demand
    values below dmin have probability 0 (h is not read there: it may lie past the block)."""
    D = len(p) - 1
    for y in range(ylo, yhi + 1):
        top = y - kfmin
        base = top * D  # T index of (y, m) is base - m * (D - 1)
        for m in range(min(dmin, top + 1, D)):
            T[base - m * (D - 1)] = 0.0
        acc = 0.0
        for m in range(dmin, min(top, D - 1) + 1):
            acc += p[m] * h[zs + y - m]
            T[base - m * (D - 1)] = acc
        if top >= D:
            if D >= dmin:
                acc += p[D] * h[zs + y - D]
            F[y - ylo] = acc


@njit(cache=True)
def _units(u0, u1, h, th, choice, T, F, E, unit_start, uo_start, uo, blk, cmb_start, cmb, totals, upper, lower,
           vmin, cd, co, floor, p, tail, alpha, beta, gamma, pick):
    """Sweep units u0 .. u1-1: th = min over orders of alpha * (c + beta * E h) + gamma * h, or
    with pick, choice = the first order within 1e-12 (relative) of th (`iteration._segment_argmin`)."""
    D = len(p) - 1
    dmin = 0
    while p[dmin] == 0.0:
        dmin += 1
    for u in range(u0, u1):
        b0, b1 = unit_start[u], unit_start[u + 1]
        first, last = blk[b0, 0], blk[b1 - 1, 0] + blk[b1 - 1, 2] - blk[b1 - 1, 1] + 1
        if pick:
            choice[first:last] = -1
        else:
            th[first:last] = np.inf
        for j in range(uo_start[u + 1] - uo_start[u]):
            row = uo_start[u] + j
            zb, ylo, yhi, kfmin = uo[row, 0], uo[row, 1], uo[row, 2], uo[row, 3]
            zs = blk[zb, 0] - blk[zb, 1]
            _fill(h, T, F, zs, ylo, yhi, kfmin, p, dmin)
            cj = co[j]
            for b in range(b0, b1):
                c = cmb_start[b] + j
                if c >= cmb_start[b + 1]:
                    continue
                lo, r = blk[b, 1], cmb[c, 2]
                n = (blk[b, 2] if j == 0 else min(blk[b, 2], upper - blk[b, 3] - totals[j])) - lo + 1
                kf = max(floor + r, lower)
                m0 = lo + cmb[c, 3] + r - kf  # demand above m0 + i leaves the next stock at kf
                hf = h[zs + kf] if m0 < D else 0.0
                i1, i2 = min(max(-m0, 0), n), min(max(D - m0, 0), n)
                row, s0 = lo + cmb[c, 3] - vmin, blk[b, 0]
                t0, f0 = (kf - kfmin) * D + m0, kf + m0 - ylo
                if pick:
                    for i in range(i1):  # every demand leaves the floor
                        E[i] = tail[0] * hf
                    for i in range(i1, i2):
                        E[i] = T[t0 + i] + tail[m0 + i + 1] * hf
                    for i in range(i2, n):  # no demand reaches the floor
                        E[i] = F[f0 + i]
                    for i in range(n):
                        s = s0 + i
                        q = alpha * ((cd[row + i] + cj) + beta * E[i]) + gamma * h[s]
                        if choice[s] < 0 and q <= th[s] + 1e-12 * max(1.0, abs(th[s])):
                            choice[s] = j
                else:  # the same expectations, folded into the minimum at once
                    for i in range(i1):
                        th[s0 + i] = min(th[s0 + i], (cd[row + i] + cj) + beta * (tail[0] * hf))
                    for i in range(i1, i2):
                        ev = T[t0 + i] + tail[m0 + i + 1] * hf
                        th[s0 + i] = min(th[s0 + i], (cd[row + i] + cj) + beta * ev)
                    for i in range(i2, n):
                        th[s0 + i] = min(th[s0 + i], (cd[row + i] + cj) + beta * F[f0 + i])
        if not pick:
            # alpha * t + gamma * h(s) is increasing in t in floating point too, so applying it
            # to the minimum gives the same bits as applying it to every order first
            for s in range(first, last):
                th[s] = alpha * th[s] + gamma * h[s]


@njit(cache=True)
def sweep(h, th, choice, s_len, unit_start, uo_start, uo, blk, cmb_start, cmb, totals, upper, lower, vmin, cd, co,
          floor, p, tail, alpha, beta, gamma, pick):
    """One sweep over every unit on one thread (see `_units`)."""
    T, F, E = np.empty(s_len), np.empty(s_len), np.empty(s_len)
    _units(0, len(unit_start) - 1, h, th, choice, T, F, E, unit_start, uo_start, uo, blk, cmb_start, cmb, totals,
           upper, lower, vmin, cd, co, floor, p, tail, alpha, beta, gamma, pick)


@njit(parallel=True, cache=True)
def sweep_threads(h, th, choice, s_len, unit_start, uo_start, uo, blk, cmb_start, cmb, totals, upper, lower, vmin,
                  cd, co, floor, p, tail, alpha, beta, gamma, pick):
    """`sweep` with the units shared among numba's threads."""
    nu = len(unit_start) - 1
    for k in prange(CHUNKS):
        T, F, E = np.empty(s_len), np.empty(s_len), np.empty(s_len)
        _units(k * nu // CHUNKS, (k + 1) * nu // CHUNKS, h, th, choice, T, F, E, unit_start, uo_start, uo, blk,
               cmb_start, cmb, totals, upper, lower, vmin, cd, co, floor, p, tail, alpha, beta, gamma, pick)
