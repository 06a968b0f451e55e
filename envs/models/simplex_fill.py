"""The compiled loop behind `exact_space.simplex_states`: every x in Z_+^n with sum(x) <= upper,
written row by row in the order of a state index (first entry fastest)."""
from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def fill_simplex(out: np.ndarray, upper: int) -> None:
    """Fill out [count, n] with the simplex rows, the first entry varying fastest."""
    n = out.shape[1]
    x = np.zeros(n, dtype=np.int64)
    total = 0
    for row in range(out.shape[0]):
        out[row] = x
        # next row: raise the first entry that can grow, resetting those before it
        i = 0
        while i < n and total == upper:
            total -= x[i]
            x[i] = 0
            i += 1
        if i == n:
            break
        x[i] += 1
        total += 1
