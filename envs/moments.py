"""Moments of a pmf on 0, 1, 2, ... (demand tables and lead-time tables alike)."""
from __future__ import annotations

from typing import Any

import numpy as np


def pmf_moments(probs: Any) -> tuple[float, float]:
    """Mean and variance of a pmf on 0, 1, ..., len(probs) - 1."""
    k = np.arange(len(probs))
    m = float(np.dot(k, probs))
    return m, float(np.dot((k - m) ** 2, probs))


class PmfMoments:
    """`mean` and `var` of a pmf held in `self.probs` (demand tables and lead-time tables)."""

    probs: Any

    @property
    def mean(self) -> float:
        return pmf_moments(self.probs)[0]

    @property
    def var(self) -> float:
        return pmf_moments(self.probs)[1]
