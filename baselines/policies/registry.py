"""Policy names (as typed on the command line) -> classes, with a one-line description each;
`make_policy` builds one from given parameters or, when none are given, optimises it.
"""
from __future__ import annotations

from typing import Any, Mapping

from invbench.baselines.policy import PolicyBase
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from .base_stock import BaseStockPolicy
from .bsp_low_ew import BSPLowEWPolicy
from .capped_base_stock import CappedBaseStockPolicy
from .capped_dual_index import CappedDualIndexPolicy
from .constant_order import ConstantOrderPolicy
from .dual_index import DualIndexPolicy
from .echelon import EchelonBaseStockPolicy, InstallationBaseStockPolicy, ShangSongPolicy
from .myopic import MyopicPolicy
from .pil import PILPolicy
from .pout import POUTPolicy
from .s_s import SSPolicy
from .single_source import SingleExpeditedPolicy, SingleRegularPolicy
from .tailored_base_surge import TailoredBaseSurgePolicy

POLICIES: dict[str, type[PolicyBase]] = {
    "base_stock": BaseStockPolicy,
    "s_S": SSPolicy,
    "constant_order": ConstantOrderPolicy,
    "capped_base_stock": CappedBaseStockPolicy,
    "pil": PILPolicy,
    "myopic": MyopicPolicy,
    "bsp_low_ew": BSPLowEWPolicy,
    "single_regular": SingleRegularPolicy,
    "single_expedited": SingleExpeditedPolicy,
    "dual_index": DualIndexPolicy,
    "capped_dual_index": CappedDualIndexPolicy,
    "tailored_base_surge": TailoredBaseSurgePolicy,
    "echelon_base_stock": EchelonBaseStockPolicy,
    "shang_song": ShangSongPolicy,
    "installation_base_stock": InstallationBaseStockPolicy,
    "pout": POUTPolicy,
}

_DESCRIPTIONS: dict[str, str] = {
    "base_stock": "order up to S on the inventory position (params: S)",
    "s_S": "when the inventory position is <= s, order up to S (params: s, S)",
    "constant_order": "order r units every period (params: r; lost sales only when optimised)",
    "capped_base_stock": "order up to S, at most r units a period (params: S, r)",
    "pil": "order so the expected stock when the order arrives reaches the target (params: target); "
           "random lead time: projected over the mean lead time",
    "myopic": "order minimising the expected cost of the period the order arrives in (no params)",
    "bsp_low_ew": "perishables: order up to S1 (below b) or S2 on the position less expected waste "
                  "(Haijema & Minner 2019; params: S1, S2, b)",
    "single_regular": "dual sourcing: order up to S with the regular supplier only (params: S)",
    "single_expedited": "dual sourcing: order up to S with the expedited supplier only (params: S)",
    "dual_index": "dual sourcing: expedite up to S_e, then order regular up to S_r (params: S_e, S_r)",
    "capped_dual_index": "dual sourcing: expedite up to S_e, order regular up to S_r, at most r (params: S_e, S_r, r)",
    "tailored_base_surge": "dual sourcing: order r regular every period, expedite up to S_e (params: r, S_e)",
    "echelon_base_stock": "serial chain: stage j orders up to s[j] on its echelon position (params: s, a list)",
    "shang_song": "serial chain: echelon base-stock at the Shang-Song newsvendor-bound levels (no params)",
    "installation_base_stock": "serial chain: stage j orders up to r[j] on its own stock, transit and "
                               "the order from below (params: r, a list)",
    "pout": "proportional order-up-to: mean demand plus (S - mean demand - position) / T "
            "(Disney et al. 2016; params: S, T >= 1; T = 1 is base-stock)",
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


def supports(name: str, model: str | InstanceSpec) -> bool:
    """Whether the policy `name` is defined for `model` (a model name, or an instance: then its
    kind of lead time counts too)."""
    cls = policy_class(name)
    if isinstance(model, InstanceSpec):
        return supports(name, model.model) and model.lead_time_kind in cls.lead_time_kinds
    return not cls.models or model in cls.models


def policies_for_instance(spec: InstanceSpec) -> list[str]:
    """Names of the classical policies defined for this instance (its model and lead time)."""
    return [n for n in POLICIES if supports(n, spec)]


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
    if not supports(name, spec):
        kind = spec.lead_time_kind.replace("_", " ")
        raise SpecError(f"policy: {name} is not defined for a {kind} lead time "
                        f"(policies for this instance: {', '.join(policies_for_instance(spec))})")
    if params is not None and not isinstance(params, Mapping):
        raise SpecError(f"param: must be a table of parameter values for {name}, got {params!r}")
    if not params:
        return cls.optimize(spec, progress=progress, max_states=max_states)  # type: ignore[attr-defined]
    return cls.from_params(spec, **dict(params))  # type: ignore[attr-defined]
