"""Saving and loading learned policies in the common policy format (`baselines/artifact.py`):
`weights.safetensors` (plain tensors, loaded without unpickling) and `policy.json` (instance,
scaling, architecture, training settings, versions, measured cost).

On load, anything unexpected is refused with a one-line `PolicyFileError`: a pickle or zip in
place of the weights, a checksum or digest that does not match, tensors that do not fit the
architecture, or an instance of another shape than the one asked for. Nothing is unpickled.
Folders written by the earlier learned-only format still load.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

import numpy as np

from invbench.baselines.artifact import check_instance, instance_differences, load_policy  # noqa: F401
from invbench.baselines.artifact_io import (ARRAY_FILES, META, PolicyFileError, atomic_write,  # noqa: F401
                                            refuse, versions, write_json_atomic, write_policy_dir)
from invbench.envs.spec import InstanceSpec

WEIGHTS = ARRAY_FILES["learned"]
_atomic_write = atomic_write  # the name the training callbacks use


def save_learned(policy: Any, directory: str | Path, measured: Mapping[str, Any] | None = None) -> Path:
    """Write `policy` (a LearnedPolicy) to `directory`; both files are replaced atomically."""
    import torch  # noqa: F401  (loaded already; listed in the versions)
    meta: dict[str, Any] = {
        "kind": "learned", "name": "learned", "agent": policy.agent, "instance": policy.spec.to_dict(),
        "scaling": policy.scaling.to_dict(), "architecture": dict(policy.net.arch),
        "training": policy.meta.get("training", {}), "versions": versions(),
        "measured": dict(measured if measured is not None else policy.meta.get("measured", {})),
    }
    return write_policy_dir(directory, meta, policy.net.named_tensors())


save_policy = save_learned


def build_learned(meta: Mapping[str, Any], arrays: Mapping[str, np.ndarray], stored: InstanceSpec,
                  target: InstanceSpec) -> Any:
    """The LearnedPolicy of a checked policy folder, applied to `target`."""
    import torch

    from .learned_policy import LearnedPolicy
    from .network import PolicyNet, check_architecture, head_widths, tensor_shapes
    from .scaling import Scaling

    arch = check_architecture(meta["architecture"])
    scaling = Scaling.from_dict(meta["scaling"])
    if arch["inputs"] != stored.state_dim or head_widths(arch) != scaling.slot_counts:
        refuse(f"policy: architecture {arch['inputs']} -> {head_widths(arch)} does not fit state length "
               f"{stored.state_dim} and {scaling.slot_counts} order sizes per slot")
    slots = target.order_slots
    if len(slots) != scaling.n_slots:
        refuse(f"policy: places {scaling.n_slots} order(s) per period, the instance's model {len(slots)}")
    shapes = tensor_shapes(arch)
    if set(arrays) != set(shapes):
        refuse(f"policy: {WEIGHTS} tensors {sorted(arrays)} do not match the architecture {sorted(shapes)}")
    for name, shape in shapes.items():
        a = arrays[name]
        if tuple(a.shape) != tuple(shape):
            refuse(f"policy: tensor {name} has shape {tuple(a.shape)}, architecture needs {tuple(shape)}")
        if a.dtype.kind != "f" or not bool(np.isfinite(a).all()):
            refuse(f"policy: tensor {name} must hold finite floating-point numbers")
    if scaling.n_slots == 1 and scaling.max_order_units > target.order_cap_units:
        refuse(f"policy: orders up to {scaling.max_order_units} units exceed the instance's cap {target.order_cap_units}")
    for j, (sizes, slot) in enumerate(zip(scaling.slot_sizes, slots)):
        if not set(sizes) <= set(int(u) for u in slot.sizes_units):
            refuse(f"policy: slot {j} ({slot.name}) orders sizes that are not legal for the instance "
                   f"(up to {sizes[-1]} units, the instance's cap {slot.cap_units})")
    net = PolicyNet(arch, init=False)
    net.load_named_tensors({k: torch.from_numpy(np.array(v, dtype=np.float32)) for k, v in arrays.items()})
    return LearnedPolicy(target, scaling, net, agent=str(meta.get("agent", "")),
                         meta={k: meta.get(k) for k in ("training", "versions", "measured")})
