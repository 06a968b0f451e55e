"""Policy names (as typed on the command line) -> classes, with a one-line description each;
`make_policy` builds one from given parameters or, when none are given, optimises it.
"""
from __future__ import annotations

from typing import Any, Mapping

from invbench.baselines.policy import PolicyBase
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from .base_stock import BaseStockPolicy
from .capped_base_stock import CappedBaseStockPolicy
from .constant_order import ConstantOrderPolicy
from .echelon import EchelonBaseStockPolicy, InstallationBaseStockPolicy, ShangSongPolicy
from .myopic import MyopicPolicy
from .pil import PILPolicy
from .s_s import SSPolicy

POLICIES: dict[str, type[PolicyBase]] = {
    "base_stock": BaseStockPolicy,
    "s_S": SSPolicy,
    "constant_order": ConstantOrderPolicy,
    "capped_base_stock": CappedBaseStockPolicy,
    "pil": PILPolicy,
    "myopic": MyopicPolicy,
    "echelon_base_stock": EchelonBaseStockPolicy,
    "shang_song": ShangSongPolicy,
    "installation_base_stock": InstallationBaseStockPolicy,
}

_DESCRIPTIONS: dict[str, str] = {
    "base_stock": "order up to S on the inventory position (params: S)",
    "s_S": "when the inventory position is <= s, order up to S (params: s, S)",
    "constant_order": "order r units every period (params: r; lost sales only when optimised)",
    "capped_base_stock": "order up to S, at most r units a period (params: S, r)",
    "pil": "order so the expected stock when the order arrives reaches the target (params: target)",
    "myopic": "order minimising the expected cost of the period the order arrives in (no params)",
    "echelon_base_stock": "serial chain: stage j orders up to s[j] on its echelon position (params: s, a list)",
    "shang_song": "serial chain: echelon base-stock at the Shang-Song newsvendor-bound levels (no params)",
    "installation_base_stock": "serial chain: stage j orders up to r[j] on its own stock, transit and "
                               "the order from below (params: r, a list)",
}


def policy_names() -> list[str]:
    return list(POLICIES)


def policy_descriptions() -> dict[str, str]:
    """name -> one-line description, in registry order."""
    return dict(_DESCRIPTIONS)


def policy_class(name: str) -> type[PolicyBase]:
    if name not in POLICIES:
        raise SpecError(f"policy: must be one of {', '.join(POLICIES)}, got {name!r}")
    return POLICIES[name]


def supports(name: str, model: str) -> bool:
    """Whether the policy `name` is defined for `model`."""
    cls = policy_class(name)
    return not cls.models or model in cls.models


def policies_for(model: str) -> list[str]:
    """Names of the classical policies defined for `model`, in registry order."""
    return [n for n in POLICIES if supports(n, model)]


def make_policy(spec: InstanceSpec, name: str, params: Mapping[str, Any] | None = None, *,
                progress: bool = False, max_states: int | None = None) -> PolicyBase:
    """The policy `name` with `params`; with params None or empty, its optimised instance
    (`.optimum` then tells how it was found and what it costs)."""
    cls = policy_class(name)
    if not supports(name, spec.model):
        raise SpecError(f"policy: {name} is not defined for the {spec.model} model "
                        f"(policies for it: {', '.join(policies_for(spec.model))})")
    if params is not None and not isinstance(params, Mapping):
        raise SpecError(f"param: must be a table of parameter values for {name}, got {params!r}")
    if not params:
        return cls.optimize(spec, progress=progress, max_states=max_states)  # type: ignore[attr-defined]
    return cls.from_params(spec, **dict(params))  # type: ignore[attr-defined]
