"""One saved-policy format for every policy: the optimal table, a classical policy with its
parameters, a trained network. `save_policy(obj, DIR)` writes a folder, `load_policy(DIR)` reads
any of them back (instance matched by content, files checked, nothing unpickled), and
`export_table` writes the optimal table as CSV or Parquet for study.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, load_spec, spec_from_dict

from .artifact_io import META, PolicyFileError, read_arrays, read_meta, refuse, write_policy_dir

STATE_SCOPES = ("all", "reachable")


@dataclass(frozen=True)
class SavedPolicyInfo:
    """What a loaded folder held: attached to the loaded policy as `.artifact`."""

    path: str
    kind: str  # "table", "classical" or "learned"
    name: str
    digest: str
    instance: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "kind": self.kind, "name": self.name, "digest": self.digest,
                "instance": self.instance}


# ---------------------------------------------------------------------------- saving
def _is_solve_result(obj: Any) -> bool:
    from .exact import SolveResult
    return isinstance(obj, SolveResult)


def save_policy(obj: Any, directory: str | Path, *, states: str = "all",
                measured: Mapping[str, Any] | None = None, other_files: bool = False) -> Path:
    """Save a policy to `directory` (policy.json, plus a safetensors file for tables and networks).

    obj: what `solve()` returned (the optimal table; `states="reachable"` keeps only the states
    reachable from the empty start under it), the table policy itself (all states), a classical
    policy (`make_policy`), or a learned policy. `measured`: an evaluation to keep with it.
    `other_files`: the folder may hold other files (a training run's curve and checkpoints).
    """
    from .table_policy import TablePolicy
    if states not in STATE_SCOPES:
        raise SpecError(f"states: must be one of {', '.join(STATE_SCOPES)}, got {states!r}")
    if not isinstance(directory, (str, Path)):
        raise SpecError(f"directory: must be a path, got {type(directory).__name__}")
    from .artifact_io import check_save_dir
    check_save_dir(directory, other_files=other_files)
    extra: dict[str, Any] = {"measured": dict(measured or {})}
    if _is_solve_result(obj) and not isinstance(obj.policy, TablePolicy):
        # a decomposition's optimum is a classical policy (e.g. echelon base-stock levels): save
        # that policy, with the certified result beside it
        return save_policy(obj.policy, directory, measured={**dict(measured or {}), "optimum": obj.to_dict()})
    if _is_solve_result(obj):
        extra["optimum"] = obj.to_dict()
        rows = None
        if states == "reachable":
            from .exact import reachable_states
            rows = reachable_states(obj.mdp, obj.choice)
        return _save_table(obj.policy, directory, rows, extra)
    if isinstance(obj, TablePolicy):
        if states == "reachable" and obj.complete:
            raise SpecError("states: 'reachable' needs the solve result (pass what solve() returned, "
                            "not its .policy)")
        return _save_table(obj, directory, None, extra)
    if hasattr(obj, "net") and hasattr(obj, "scaling"):
        from invbench.agents.export import save_learned
        return save_learned(obj, directory, measured=measured)
    name = getattr(obj, "name", None)
    from .policies.registry import POLICIES
    if name in POLICIES and isinstance(obj, POLICIES[name]):
        optimum = getattr(obj, "optimum", None)
        if optimum is not None:
            extra["optimum"] = optimum.to_dict()
        meta = {"kind": "classical", "name": name, "instance": obj.spec.to_dict(),
                "policy": {"name": name, "params": dict(obj.params())}, **extra}
        return write_policy_dir(directory, meta, None)
    raise SpecError(f"policy: cannot save a {type(obj).__name__}; saved are the optimal table (what solve() "
                    "returns), classical policies (make_policy) and learned policies")


def _save_table(policy: Any, directory: str | Path, rows: np.ndarray | None, extra: dict[str, Any]) -> Path:
    definition, arrays = policy.table_data(rows)
    meta = {"kind": "table", "name": "optimal", "instance": policy.spec.to_dict(), "table": definition, **extra}
    return write_policy_dir(directory, meta, arrays)


# ---------------------------------------------------------------------------- instances
def _flat(d: Mapping[str, Any], prefix: str = "") -> dict[str, Any]:
    out: dict[str, Any] = {}
    for k, v in d.items():
        if isinstance(v, Mapping):
            out.update(_flat(v, f"{prefix}{k}."))
        else:
            out[f"{prefix}{k}"] = list(v) if isinstance(v, (list, tuple, np.ndarray)) else v
    return out


def instance_differences(a: InstanceSpec, b: InstanceSpec) -> list[str]:
    """Fields (dotted, e.g. `demand.mean`) in which two instances differ; the name is only a label."""
    fa, fb = _flat(a.to_dict()), _flat(b.to_dict())
    fa.pop("name", None)
    fb.pop("name", None)
    return sorted(k for k in set(fa) | set(fb) if fa.get(k) != fb.get(k))


def check_instance(stored: InstanceSpec, spec: InstanceSpec | None, allow_other_instance: bool,
                   what: str = "trained") -> InstanceSpec:
    """Matched by content, not by name: an identical instance under another name is accepted."""
    if spec is None:
        return stored
    shape = lambda s: (s.model, s.state_dim, len(s.order_slots), s.case_pack)  # noqa: E731
    if shape(spec) != shape(stored):
        refuse(f"policy: {what} for {stored.model} with state length {stored.state_dim} and case pack "
               f"{stored.case_pack}, instance has {spec.model}, {spec.state_dim}, {spec.case_pack}")
    diff = instance_differences(stored, spec)
    if diff and not allow_other_instance:
        fs, fi = _flat(stored.to_dict()), _flat(spec.to_dict())
        shown = "; ".join(f"{k} = {fs.get(k, '(unset)')!r} there, {fi.get(k, '(unset)')!r} here" for k in diff[:3])
        more = f" and {len(diff) - 3} more" if len(diff) > 3 else ""
        refuse(f"policy: {what} for another instance: {shown}{more} (apply it anyway with "
               "--allow-other-instance, or allow_other_instance=True in Python)")
    return spec


# ---------------------------------------------------------------------------- loading
def load_policy(directory: str | Path, spec: Any = None, *, allow_other_instance: bool = False) -> Any:
    """Load any saved policy folder; with `spec`, refuse it unless it was made for that instance
    (compared by content). The result has `.artifact` (kind, name, digest, instance, path)."""
    if not isinstance(directory, (str, Path)):
        refuse(f"policy: the folder must be a path, got {type(directory).__name__}")
    if not isinstance(allow_other_instance, bool):
        refuse(f"allow_other_instance: must be True or False, got {allow_other_instance!r}")
    d = Path(directory)
    if not d.is_dir():
        refuse(f"policy: {str(d)!r} is not a directory")
    meta = read_meta(d)
    try:
        stored = spec_from_dict(meta["instance"])
    except SpecError as e:
        refuse(f"policy: {META} instance is invalid ({e})")
    kind = meta["kind"]
    arrays = read_arrays(d, meta) if meta["arrays"] is not None else {}
    target = check_instance(stored, None if spec is None else load_spec(spec), allow_other_instance,
                            "trained" if kind == "learned" else "made")
    try:
        if kind == "learned":
            from invbench.agents.export import build_learned
            policy = build_learned(meta, arrays, stored, target)
        elif kind == "table":
            from .table_policy import TablePolicy
            policy = TablePolicy.from_table(target, meta["table"], arrays)
        else:
            policy = _build_classical(meta["policy"], target)
    except PolicyFileError:
        raise
    except SpecError as e:
        refuse(f"policy: {d / META} does not describe a usable {kind} policy ({e})")
    name = str(meta.get("name") or meta.get("agent") or kind)
    policy.artifact = SavedPolicyInfo(str(d), kind, name, str(meta["digest"]), target.to_dict())
    policy.saved_meta = {k: meta.get(k) for k in ("measured", "optimum", "training", "versions") if k in meta}
    return policy


def _build_classical(definition: Any, spec: InstanceSpec) -> Any:
    from .policies.registry import policy_class, supports
    if not isinstance(definition, Mapping) or not isinstance(definition.get("params"), Mapping):
        raise SpecError("policy: must hold a name and a table of params")
    name = definition.get("name")
    cls = policy_class(str(name))
    if not supports(str(name), spec.model):
        raise SpecError(f"policy: {name} is not defined for the {spec.model} model")
    return cls.from_params(spec, **dict(definition["params"]))  # type: ignore[attr-defined]


# ---------------------------------------------------------------------------- tables for study
def table_frame(obj: Any, *, states: str = "all") -> Any:
    """The optimal table as a pandas DataFrame: one row per state, the state columns (the model's
    state labels, or the solver's reduced state where it solves on one), then one column of
    units per order slot. obj: what `solve()` returned, or a table policy (all its states)."""
    import pandas as pd
    from .table_policy import TablePolicy
    if states not in STATE_SCOPES:
        raise SpecError(f"states: must be one of {', '.join(STATE_SCOPES)}, got {states!r}")
    if _is_solve_result(obj):
        policy, rows = obj.policy, None
        if states == "reachable":
            from .exact import reachable_states
            rows = reachable_states(obj.mdp, obj.choice)
    elif isinstance(obj, TablePolicy):
        if states == "reachable" and obj.complete:
            raise SpecError("states: 'reachable' needs the solve result (pass what solve() returned)")
        policy, rows = obj, None
    else:
        raise SpecError(f"table: needs what solve() returned or a table policy, got {type(obj).__name__}")
    _, arrays = policy.table_data(rows)
    spec = policy.spec
    st = arrays["states"]
    if st.shape[1] == spec.state_dim:
        names = list(spec.model_def.state_labels(spec))
    elif st.shape[1] == 1 and _keys_are_position(policy):
        names = ["inventory position"]
    else:  # another reduced state
        names = [f"{policy.representation} state {i}" for i in range(st.shape[1])]
    cols: dict[str, Any] = {n: st[:, i] for i, n in enumerate(names)}
    slots = [s.name for s in spec.order_slots]
    for j, s in enumerate(slots):
        cols[f"order ({s}, units)" if len(slots) > 1 else "order (units)"] = arrays["orders"][:, j]
    return pd.DataFrame(cols)


def _keys_are_position(policy: Any) -> bool:
    """Whether the solver's one-number state is the inventory position (probed on sample states)."""
    spec = policy.spec
    x = np.random.default_rng(0).integers(0, 5, size=(16, spec.state_dim))
    pos = spec.model_def.position(spec, x)
    return bool(np.array_equal(np.asarray(policy.space.table_keys(x))[:, 0], pos))


def export_table(obj: Any, path: str | Path, *, states: str = "all") -> Path:
    """Write `table_frame(obj)` to `path` (.csv, or .parquet with pyarrow), atomically."""
    import io

    from .artifact_io import atomic_write
    p = Path(path)
    if p.suffix.lower() not in (".csv", ".parquet"):
        raise SpecError(f"table: the file must end in .csv or .parquet, got {p.name!r}")
    df = table_frame(obj, states=states)
    p.parent.mkdir(parents=True, exist_ok=True)
    if p.suffix.lower() == ".csv":
        atomic_write(p, df.to_csv(index=False).encode())
    else:
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            raise SpecError("table: writing .parquet needs pyarrow (pip install pyarrow), or use .csv") from None
        buf = io.BytesIO()
        df.to_parquet(buf, index=False)
        atomic_write(p, buf.getvalue())
    return p
