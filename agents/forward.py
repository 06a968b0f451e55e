"""The one forward pass of an exported network as a decision: features, layers, argmax per head.

`LearnedPolicy.action_index` (evaluate, decide, serve, the rollout agent's numpy path) and the
rollout agent's compiled kernel (`rollout_kernels.py`) both call `row_index` below, so a
decision cannot differ between the two paths: the same compiled function runs on the same
float64 weights (the float32 weights converted exactly). Per row: the features are those of
`Scaling.features` (float32: state / obs_scale - obs_shift, clipped), each layer is
W x + b in float64 summed in input order (then the bias), the activation sits between the layers, and each
head's action is the first index of its largest score (as numpy's and torch's argmax).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .network import PolicyNet, head_widths

RELU, TANH = 0, 1


@dataclass(frozen=True)
class NetArrays:
    """A network and its feature scaling as the arrays `row_index` reads."""

    params: np.ndarray  # float64: layer i's weight transposed [in, out] row-major, then its bias, per layer
    sizes: np.ndarray  # int64 [layers + 1]: inputs, hidden widths, outputs
    heads: np.ndarray  # int64: width of each slot's head
    scale: np.ndarray  # float32 [3]: obs_scale, obs_shift, obs_clip (0 = no clipping)
    activation: int  # RELU or TANH

    def scratch(self) -> np.ndarray:
        """Two layer-wide buffers [2, widest layer] for `row_index`."""
        return np.zeros((2, int(self.sizes.max())))


def net_arrays(net: PolicyNet, scaling: Any) -> NetArrays:
    """The arrays of `net` with `scaling`'s features (weights copied: the net may train on)."""
    parts = []
    for layer in net.linears:
        parts.append(layer.weight.detach().double().numpy().T.reshape(-1))  # [in, out]: see row_index
        parts.append(layer.bias.detach().double().numpy().reshape(-1))
    arch = net.arch
    sizes = np.asarray([arch["inputs"], *arch["hidden"], arch["outputs"]], dtype=np.int64)
    scale = np.asarray([scaling.obs_scale, scaling.obs_shift, scaling.obs_clip], dtype=np.float32)
    return NetArrays(np.ascontiguousarray(np.concatenate(parts)), sizes,
                     np.asarray(head_widths(arch), dtype=np.int64), scale,
                     RELU if arch["activation"] == "relu" else TANH)


def row_index(s: Any, params: Any, sizes: Any, heads: Any, scale: Any, activation: int, buf: Any,
              out: Any) -> None:  # pragma: no cover - compiled (plain Python works the same)
    """Action index of each head for one state row `s`, written to out[0 .. len(heads) - 1]."""
    x = buf[0]
    y = buf[1]
    n = sizes[0]
    sc, sh, cl = scale[0], scale[1], scale[2]
    for i in range(n):
        f = np.float32(s[i]) / sc - sh  # float32 as Scaling.features (own name: stays float32)
        if cl > 0:
            f = min(max(f, -cl), cl)
        x[i] = np.float64(f)
    off = 0
    L = len(sizes) - 1
    for layer in range(L):
        m, o = sizes[layer], sizes[layer + 1]
        for j in range(o):
            y[j] = 0.0
        # input after input, each adding to every output: per output the same sum in the same
        # order as a dot product, and the loop over outputs runs in SIMD lanes
        for i in range(m):
            xi = x[i]
            row = off + i * o
            for j in range(o):
                y[j] = y[j] + params[row + j] * xi
        boff = off + m * o
        for j in range(o):
            v = y[j] + params[boff + j]
            if layer < L - 1:
                if activation == 0:
                    v = max(v, 0.0)
                else:
                    v = np.tanh(v)
            x[j] = v
        off = boff + o
    start = 0
    for h in range(len(heads)):
        best = start
        for j in range(start + 1, start + heads[h]):
            if x[j] > x[best]:
                best = j
        out[h] = best - start
        start = start + heads[h]


def _batch(states, params, sizes, heads, scale, activation, buf, out):  # pragma: no cover - compiled
    for r in range(states.shape[0]):
        row_index(states[r], params, sizes, heads, scale, activation, buf, out[r])


_COMPILED: dict[str, Any] = {}


def _batch_fn() -> Any:
    """`_batch` compiled with `row_index` (once per process; numba caches it on disk)."""
    if "batch" not in _COMPILED:
        try:
            from numba.extending import register_jitable
            from invbench.envs.models.compiled import jit
        except ImportError:  # numba is a dependency; without it the same code runs as Python
            _COMPILED["batch"] = _batch
        else:
            register_jitable(inline="always")(row_index)
            _COMPILED["batch"] = jit(_batch)
    return _COMPILED["batch"]


def register_row_index() -> None:
    """Make `row_index` callable from other compiled code (the rollout kernel)."""
    _batch_fn()


def batch_index(a: NetArrays, states: np.ndarray) -> np.ndarray:
    """Action index per head [B, heads] of int states [B, n] (the policy's forward)."""
    states = np.ascontiguousarray(states, dtype=np.int64)
    out = np.empty((len(states), len(a.heads)), dtype=np.int64)
    _batch_fn()(states, a.params, a.sizes, a.heads, a.scale, a.activation, a.scratch(), out)
    return out
