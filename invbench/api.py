"""The public Python API in a few functions; `import invbench` re-exports them."""
from __future__ import annotations

import functools
import math
from typing import Any

import gymnasium as gym

from invbench.baselines import exact
from invbench.baselines.exact import DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_STATES, SolveResult
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, load_spec
from invbench.experiments.evaluate import Evaluation, evaluate

ENV_ID = {"lost_sales": "invbench/LostSales-v0", "backorder": "invbench/Backorder-v0"}


@functools.wraps(exact.solve)
def solve(spec: Any, *, max_states: int = DEFAULT_MAX_STATES, max_memory_mb: float = DEFAULT_MAX_MEMORY_MB,
          **kwargs: Any) -> SolveResult:
    # the budgets are checked here, by type and range, so a NaN or a string cannot slip past them
    if isinstance(max_states, bool) or not isinstance(max_states, int) or max_states < 1:
        raise SpecError(f"max_states: must be an integer >= 1, got {max_states!r}")
    if (isinstance(max_memory_mb, bool) or not isinstance(max_memory_mb, (int, float))
            or not math.isfinite(max_memory_mb) or max_memory_mb <= 0):
        raise SpecError(f"max_memory_mb: must be a finite number > 0, got {max_memory_mb!r}")
    rel_tol = kwargs.get("rel_tol", 1e-6)
    if isinstance(rel_tol, bool) or not isinstance(rel_tol, (int, float)) or not 0 < rel_tol < 1:
        raise SpecError(f"rel_tol: must be a number in (0, 1), got {rel_tol!r}")
    return exact.solve(spec, max_states=max_states, max_memory_mb=max_memory_mb, **kwargs)


def make_env(spec: Any, **kwargs: Any) -> gym.Env:
    """The Gymnasium env of `spec` (InstanceSpec, dict or TOML path), via `gymnasium.make`."""
    s = load_spec(spec)
    return gym.make(ENV_ID[s.model], spec=s, **kwargs)


def make_policy(name: str, spec: Any, **params: Any) -> Any:
    """A policy for `spec` by name: a classical one (see `policies()`) with the given parameters,
    or optimised when none are given (`.optimum` then says how and at what cost); "optimal" is
    the certified optimal table (`solve(spec).policy`). Save it with `save_policy`."""
    from invbench.baselines.policies.registry import make_policy as _make, policy_names
    s = load_spec(spec)
    if not isinstance(name, str):
        raise SpecError(f"name: must be a policy name ({', '.join(['optimal', *policy_names()])}), got {name!r}")
    if name == "optimal":
        if params:
            raise SpecError(f"param.{next(iter(params))}: the optimal table takes no parameters")
        return solve(s).policy
    if name not in policy_names():
        raise SpecError(f"name: must be one of {', '.join(['optimal', *policy_names()])}, got {name!r}")
    return _make(s, name, params or None)


def save_policy(policy: Any, directory: Any, *, states: str = "all", measured: Any = None) -> Any:
    """Save a policy folder: what `solve()` returned (the optimal table; `states="reachable"` keeps
    only the states reachable from the empty start), a classical or a learned policy."""
    from invbench.baselines.artifact import save_policy as _save
    return _save(policy, directory, states=states, measured=measured)


def load_policy(directory: Any, spec: Any = None, *, allow_other_instance: bool = False) -> Any:
    """Load any saved policy folder (checked, nothing unpickled); with `spec`, refuse it unless it
    was made for that instance (compared by content, not by name)."""
    from invbench.baselines.artifact import load_policy as _load
    return _load(directory, spec, allow_other_instance=allow_other_instance)


def export_table(result: Any, path: Any, *, states: str = "all") -> Any:
    """Write the optimal table (what `solve()` returned) as .csv or .parquet: state columns, orders."""
    from invbench.baselines.artifact import export_table as _export
    return _export(result, path, states=states)


def policies() -> dict[str, str]:
    """Classical policy names with a one-line description each."""
    from invbench.baselines.policies.registry import policy_descriptions
    return policy_descriptions()


__all__ = ["Evaluation", "InstanceSpec", "SolveResult", "evaluate", "export_table", "load_policy", "load_spec",
           "make_env", "make_policy", "policies", "save_policy", "solve"]
