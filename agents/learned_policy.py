"""A trained network as a first-class policy: `act(obs[B, n]) -> orders[B]` in units, greedy
(orders [B, k] for a model with k order slots: one head per slot).

Whatever trained it, the policy is a `PolicyNet` plus the instance's `Scaling`, so evaluators,
the exact policy evaluation and the comparison with the optimum treat it like any other policy.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

import numpy as np

from invbench.baselines.policy import PolicyBase
from invbench.envs.spec import InstanceSpec

from .forward import NetArrays, batch_index, net_arrays
from .network import PolicyNet
from .scaling import Scaling

class LearnedPolicy(PolicyBase):
    """Greedy policy of a trained network: the order size with the highest score."""

    name = "learned"

    def __init__(self, spec: InstanceSpec, scaling: Scaling, net: PolicyNet, agent: str = "",
                 meta: Mapping[str, Any] | None = None) -> None:
        self.spec = spec
        self.scaling = scaling
        self.net = net.eval()
        self.agent = agent
        self.meta: dict[str, Any] = dict(meta or {})
        self._arrays: tuple[Any, NetArrays] | None = None

    def action_index(self, obs: np.ndarray) -> np.ndarray:
        """Index of the chosen order size for each row of `obs` ([B, k] with k slots)."""
        obs = np.asarray(obs)
        if obs.ndim == 1:
            obs = obs.reshape(1, -1)
        if obs.shape[1] != self.spec.state_dim:
            raise ValueError(f"policy: observations must have {self.spec.state_dim} columns, got {obs.shape[1]}")
        # the one forward of forward.py (float64, also run inside the rollout kernel), so the
        # rollout agent's compiled and numpy paths cannot decide differently
        idx = batch_index(self.arrays(), obs)
        return idx[:, 0] if idx.shape[1] == 1 else idx

    def arrays(self) -> NetArrays:
        """The network and scaling as the forward's arrays, read again only when a weight changed
        (torch counts in-place updates of each tensor in `_version`: a net may be trained on)."""
        key = (id(self.net), tuple(p._version for p in self.net.parameters()), self.scaling)
        if self._arrays is None or self._arrays[0] != key:
            self._arrays = (key, net_arrays(self.net, self.scaling))
        return self._arrays[1]

    def act(self, obs: np.ndarray) -> np.ndarray:
        obs = np.asarray(obs)
        obs2 = obs.reshape(1, -1) if obs.ndim == 1 else obs
        return self.scaling.orders(obs2, self.action_index(obs2))

    def params(self) -> dict[str, Any]:
        d = {"agent": self.agent, "hidden": list(self.net.arch["hidden"]),
             "max_order_units": self.scaling.max_order_units}
        if self.scaling.n_slots > 1:
            d["slot_max_units"] = [s[-1] for s in self.scaling.slot_sizes]
        return d

    def describe(self) -> str:
        return f"learned({self.agent})" if self.agent else "learned"

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "params": self.params(), "architecture": dict(self.net.arch),
                "scaling": self.scaling.to_dict()}

    def save(self, directory: str | Path, measured: Mapping[str, Any] | None = None) -> Path:
        """Export to `directory` (weights.safetensors + policy.json); returns the directory."""
        from .export import save_policy
        return save_policy(self, directory, measured=measured)
