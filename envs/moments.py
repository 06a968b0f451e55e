"""Moments of a pmf on 0, 1, 2, ... (demand tables and lead-time tables alike)."""
from __future__ import annotations

from typing import Any

import numpy as np


def pmf_moments(probs: Any) -> tuple[float, float]:
    """Mean and variance of a pmf on 0, 1, ..., len(probs) - 1."""
    k = np.arange(len(probs))
    m = float(np.dot(k, probs))
    return m, float(np.dot((k - m) ** 2, probs))
