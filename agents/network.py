"""The plain feed-forward network every exported policy uses, whoever trained it.

SB3's actor (PPO, A2C), its Q-network (DQN) and our own rollout classifier are all copied into
this one shape, so the exchange format knows a single architecture: linear layers with one
activation, the output a score per order size, the greedy action its argmax. A model with
several order slots gets one head per slot: the output is the slots' scores concatenated
(`heads` lists each slot's width) and the greedy action is the argmax within each head.
"""
from __future__ import annotations

from typing import Any, Mapping

import torch
from torch import nn

from invbench.envs.errors import SpecError

ACTIVATIONS = {"tanh": nn.Tanh, "relu": nn.ReLU}


def architecture(inputs: int, hidden: tuple[int, ...] | list[int], outputs: int, activation: str,
                 head: str, heads: list[int] | None = None) -> dict[str, Any]:
    """The JSON-able description from which `PolicyNet` is rebuilt; `heads` (widths of the
    slots' heads, summing to `outputs`) only when there are several slots."""
    arch = {"type": "mlp", "inputs": int(inputs), "hidden": [int(h) for h in hidden], "outputs": int(outputs),
            "activation": activation, "head": head}
    if heads is not None and len(heads) > 1:
        arch["heads"] = [int(h) for h in heads]
    return arch


def head_widths(arch: Mapping[str, Any]) -> list[int]:
    """Width of each slot's head (one head of all outputs when `heads` is absent)."""
    return list(arch.get("heads", [arch["outputs"]]))


def greedy(scores: torch.Tensor, heads: list[int]) -> torch.Tensor:
    """Argmax within each head: [B] for one head, [B, k] for k heads."""
    if len(heads) == 1:
        return scores.argmax(dim=1)
    return torch.stack([part.argmax(dim=1) for part in torch.split(scores, heads, dim=1)], dim=1)


def check_architecture(arch: Mapping[str, Any]) -> dict[str, Any]:
    """Validate an architecture read from a file; raises SpecError naming the bad key."""
    if not isinstance(arch, Mapping):
        raise SpecError("policy.json architecture: must be a table")
    want = {"type", "inputs", "hidden", "outputs", "activation", "head"}
    if set(arch) - {"heads"} != want:
        raise SpecError(f"policy.json architecture: must have exactly the keys {', '.join(sorted(want))} "
                        "(and heads with several order slots)")
    if arch["type"] != "mlp":
        raise SpecError(f"policy.json architecture.type: must be 'mlp', got {arch['type']!r}")
    if arch["activation"] not in ACTIVATIONS:
        raise SpecError(f"policy.json architecture.activation: must be one of {', '.join(ACTIVATIONS)}")
    if arch["head"] not in ("logits", "q_values"):
        raise SpecError("policy.json architecture.head: must be 'logits' or 'q_values'")
    sizes = [arch["inputs"], *arch["hidden"], arch["outputs"]] if isinstance(arch["hidden"], list) else None
    if sizes is None or not all(isinstance(s, int) and not isinstance(s, bool) and 1 <= s <= 100_000 for s in sizes):
        raise SpecError("policy.json architecture: layer sizes must be integers in [1, 100000]")
    if "heads" in arch:
        h = arch["heads"]
        if (not isinstance(h, list) or not 2 <= len(h) <= 64
                or not all(isinstance(w, int) and not isinstance(w, bool) and w >= 1 for w in h)
                or sum(h) != arch["outputs"]):
            raise SpecError("policy.json architecture.heads: must be 2 to 64 integers >= 1 summing to outputs")
    return dict(arch)


def tensor_shapes(arch: Mapping[str, Any]) -> dict[str, tuple[int, ...]]:
    """Name -> shape of every tensor the architecture needs (the weights file must match exactly)."""
    sizes = [arch["inputs"], *arch["hidden"], arch["outputs"]]
    out: dict[str, tuple[int, ...]] = {}
    for i in range(len(sizes) - 1):
        out[f"linear{i}.weight"] = (sizes[i + 1], sizes[i])
        out[f"linear{i}.bias"] = (sizes[i + 1],)
    return out


class PolicyNet(nn.Module):
    """Linear layers with one activation between them; returns one score per action."""

    def __init__(self, arch: Mapping[str, Any], init: bool = True) -> None:
        """`init=False` leaves the weights uninitialised for a caller that copies them in: no
        random initialisation, so copying a network never draws from torch's global generator."""
        super().__init__()
        self.arch = check_architecture(arch)
        sizes = [arch["inputs"], *arch["hidden"], arch["outputs"]]
        make = nn.Linear if init else (lambda i, o: nn.utils.skip_init(nn.Linear, i, o))
        self.linears = nn.ModuleList(make(sizes[i], sizes[i + 1]) for i in range(len(sizes) - 1))
        self.act = ACTIVATIONS[arch["activation"]]()

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        for i, layer in enumerate(self.linears):
            x = layer(x)
            if i < len(self.linears) - 1:
                x = self.act(x)
        return x

    def named_tensors(self) -> dict[str, torch.Tensor]:
        out: dict[str, torch.Tensor] = {}
        for i, layer in enumerate(self.linears):
            out[f"linear{i}.weight"] = layer.weight.detach().clone().contiguous()
            out[f"linear{i}.bias"] = layer.bias.detach().clone().contiguous()
        return out

    def load_named_tensors(self, tensors: Mapping[str, torch.Tensor]) -> None:
        with torch.no_grad():
            for i, layer in enumerate(self.linears):
                layer.weight.copy_(tensors[f"linear{i}.weight"])
                layer.bias.copy_(tensors[f"linear{i}.bias"])


def from_linears(layers: list[nn.Linear], activation: str, head: str,
                 heads: list[int] | None = None) -> PolicyNet:
    """Copy a chain of linear layers (e.g. taken out of an SB3 policy) into a `PolicyNet`."""
    arch = architecture(layers[0].in_features, [l.out_features for l in layers[:-1]], layers[-1].out_features,
                        activation, head, heads)
    net = PolicyNet(arch, init=False)
    with torch.no_grad():
        for dst, src in zip(net.linears, layers):
            dst.weight.copy_(src.weight)
            dst.bias.copy_(src.bias)
    return net
