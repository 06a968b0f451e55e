"""Benchmark suites: a TOML file naming instances, policies and seeds, expanded into cells.

A cell is one (instance, policy, seed) task. Its id is a hash of everything that decides its
result, so a rerun can tell finished cells from new ones and an edited suite never reuses a
stale result. Packaged suites live in `experiments/suites/` and can be named without a path.
"""
from __future__ import annotations

import copy
import hashlib
import itertools
import json
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import tomli_w

from invbench.envs.errors import SpecError
from invbench.envs.spec import MODELS, InstanceSpec, load_spec, spec_from_dict

SUITES_DIR = Path(__file__).resolve().parent / "suites"
#: Bumped when a cell's result format changes, so old results are not mistaken for new ones.
CELL_FORMAT = 1
KINDS = ("optimum", "classical", "agent", "custom")
EVAL_KEYS = {"method": str, "replications": int, "periods": int, "warmup": int}
EVAL_METHODS = ("auto", "exact", "simulate")
SUITE_KEYS = ("name", "description", "seeds", "sweep", "invented")
POLICY_KEYS = ("kind", "name", "label", "params", "agent", "steps", "settings", "function",
               "seeds", "evaluation", "models", "cpu_seconds")
INSTANCE_EXTRA_KEYS = ("file", "vary")


@dataclass(frozen=True)
class PolicyEntry:
    """One `[[policies]]` entry: what to run on every instance, and with which seeds."""

    kind: str
    label: str
    name: str = ""
    params: Mapping[str, Any] | None = None
    agent: str = ""
    steps: int = 0
    settings: Mapping[str, Any] = field(default_factory=dict)
    function: str = ""
    seeds: tuple[int, ...] = (0,)
    evaluation: Mapping[str, Any] = field(default_factory=dict)
    models: tuple[str, ...] = ()  # empty: every instance; else only instances of these models
    cpu_seconds: float = 0.0  # agents: stop training once a cell has used this much CPU (0: no cap)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"kind": self.kind, "label": self.label}
        for key in ("name", "agent", "function"):
            if getattr(self, key):
                d[key] = getattr(self, key)
        if self.params is not None:
            d["params"] = dict(self.params)
        if self.kind == "agent":
            d["steps"] = self.steps
            if self.cpu_seconds:
                d["cpu_seconds"] = self.cpu_seconds
        if self.settings:
            d["settings"] = dict(self.settings)
        d["seeds"] = list(self.seeds)
        if self.evaluation:
            d["evaluation"] = dict(self.evaluation)
        if self.models:
            d["models"] = list(self.models)
        return d


@dataclass(frozen=True)
class Cell:
    """One task: a policy entry on an instance with one seed."""

    suite: str
    instance: InstanceSpec
    policy: PolicyEntry
    seed: int
    evaluation: Mapping[str, Any]

    @property
    def instance_name(self) -> str:
        return self.instance.label

    @property
    def cell_id(self) -> str:
        key = {"format": CELL_FORMAT, "instance": self.instance.to_dict(), "seed": self.seed,
               "evaluation": dict(self.evaluation), "policy": _semantic(self.policy)}
        blob = json.dumps(key, sort_keys=True, separators=(",", ":"), default=str)
        return hashlib.sha256(blob.encode()).hexdigest()[:16]

    def to_payload(self) -> dict[str, Any]:
        """Plain JSON-able description sent to a worker (a process or a Ray task)."""
        return {"cell_id": self.cell_id, "suite": self.suite, "instance": self.instance.to_dict(),
                "policy": self.policy.to_dict(), "seed": self.seed,
                "evaluation": dict(self.evaluation)}


def _semantic(p: PolicyEntry) -> dict[str, Any]:
    # The label is only a display name: renaming an entry must not recompute its cells.
    d = p.to_dict()
    d.pop("label", None)
    d.pop("seeds", None)
    d.pop("models", None)
    return d


@dataclass(frozen=True)
class Suite:
    """A loaded, validated suite."""

    name: str
    description: str
    instances: tuple[InstanceSpec, ...]
    policies: tuple[PolicyEntry, ...]
    evaluation: Mapping[str, Any]
    sweep: str = ""
    invented: bool = False
    source: str = ""

    def cells(self, skip_kinds: tuple[str, ...] = ()) -> list[Cell]:
        """All cells, optimum entries first so later cells can show their gap while running."""
        order = sorted(range(len(self.policies)), key=lambda i: self.policies[i].kind != "optimum")
        out = []
        for i in order:
            p = self.policies[i]
            if p.kind in skip_kinds:
                continue
            ev = {**self.evaluation, **p.evaluation}
            for spec in self.instances:
                if p.models and spec.model not in p.models:
                    continue
                for seed in p.seeds:
                    out.append(Cell(self.name, spec, p, seed, ev))
        return out

    def to_dict(self) -> dict[str, Any]:
        head: dict[str, Any] = {"name": self.name, "description": self.description}
        if self.sweep:
            head["sweep"] = self.sweep
        head["invented"] = self.invented
        return {"suite": head, "evaluation": dict(self.evaluation),
                "instances": [s.to_dict() for s in self.instances],
                "policies": [p.to_dict() for p in self.policies]}

    def to_toml(self) -> str:
        """The suite with every instance written out inline (what a results folder keeps)."""
        return tomli_w.dumps(self.to_dict())


def packaged_suites() -> list[str]:
    return sorted(p.stem for p in SUITES_DIR.glob("*.toml"))


def load_suite(source: str | Path) -> Suite:
    """Load a suite from a TOML path or the name of a packaged suite (e.g. "quick")."""
    path = Path(source)
    if not path.is_file():
        cand = SUITES_DIR / f"{source}.toml"
        if not cand.is_file():
            raise SpecError(f"suite: {str(source)!r} is neither a file nor a packaged suite "
                            f"(packaged: {', '.join(packaged_suites())})")
        path = cand
    try:
        data = tomllib.loads(path.read_text())
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"suite: {path} is not valid TOML ({e})") from None
    return suite_from_dict(data, base_dir=path.parent, source=str(path))


def suite_from_dict(data: Mapping[str, Any], base_dir: Path | None = None, source: str = "") -> Suite:
    for key in data:
        if key not in ("suite", "evaluation", "instances", "policies"):
            raise SpecError(f"{key}: unknown top-level key (allowed: suite, evaluation, instances, policies)")
    head = _table(data.get("suite"), "suite", required=True)
    _known(head, SUITE_KEYS, "suite")
    name = head.get("name")
    if not isinstance(name, str) or not name.strip() or "/" in name:
        raise SpecError(f"suite.name: required, a non-empty string without '/', got {name!r}")
    desc = head.get("description", "")
    if not isinstance(desc, str):
        raise SpecError(f"suite.description: must be a string, got {desc!r}")
    seeds = _seeds(head.get("seeds", [0]), "suite.seeds")
    sweep = head.get("sweep", "")
    if sweep not in ("", "lead_time"):
        raise SpecError(f"suite.sweep: must be \"lead_time\" or absent, got {sweep!r}")
    invented = head.get("invented", False)
    if not isinstance(invented, bool):
        raise SpecError(f"suite.invented: must be true or false, got {invented!r}")
    evaluation = _evaluation(data.get("evaluation", {}), "evaluation")
    instances = _instances(data.get("instances"), base_dir or Path.cwd())
    policies = _policies(data.get("policies"), seeds)
    return Suite(name.strip(), desc, instances, policies, evaluation, sweep, invented, source)


def _table(v: Any, where: str, required: bool = False) -> dict[str, Any]:
    if v is None and not required:
        return {}
    if not isinstance(v, Mapping):
        raise SpecError(f"{where}: must be a table" + (" (required)" if required else ""))
    return dict(v)


def _known(d: Mapping[str, Any], allowed: tuple[str, ...], where: str) -> None:
    for k in d:
        if k not in allowed:
            raise SpecError(f"{where}.{k}: unknown key (allowed: {', '.join(allowed)})")


def _int(v: Any, where: str, lo: int) -> int:
    if isinstance(v, bool) or not isinstance(v, int) or v < lo:
        raise SpecError(f"{where}: must be an integer >= {lo}, got {v!r}")
    return v


def _seeds(v: Any, where: str) -> tuple[int, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError(f"{where}: must be a non-empty list of integers >= 0, got {v!r}")
    out = tuple(_int(s, where, 0) for s in v)
    if len(set(out)) != len(out):
        raise SpecError(f"{where}: seeds must be distinct, got {list(out)}")
    return out


def _evaluation(v: Any, where: str) -> dict[str, Any]:
    d = _table(v, where)
    out: dict[str, Any] = {}
    for k, val in d.items():
        if k not in EVAL_KEYS:
            raise SpecError(f"{where}.{k}: unknown key (allowed: {', '.join(EVAL_KEYS)})")
        if k == "method":
            if val not in EVAL_METHODS:
                raise SpecError(f"{where}.method: must be one of {', '.join(EVAL_METHODS)}, got {val!r}")
            out[k] = val
        else:
            out[k] = _int(val, f"{where}.{k}", 0 if k == "warmup" else 1)
    return out


def _instances(v: Any, base_dir: Path) -> tuple[InstanceSpec, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError("instances: need at least one [[instances]] entry")
    out: list[InstanceSpec] = []
    for i, raw in enumerate(v):
        where = f"instances[{i}]"
        d = _table(raw, where)
        for spec in _expand(d, where, base_dir):
            out.append(spec)
    _check_unique(out, "instances: name {!r} is used twice; give each instance its own name")
    return tuple(out)


def _expand(d: dict[str, Any], where: str, base_dir: Path) -> list[InstanceSpec]:
    """One entry -> specs: inline, from `file =`, and/or a grid over `vary = {field = [values]}`."""
    vary = _table(d.pop("vary", None), f"{where}.vary")
    if "file" in d:
        f = d.pop("file")
        if not isinstance(f, str):
            raise SpecError(f"{where}.file: must be a path string, got {f!r}")
        path = Path(f) if Path(f).is_absolute() else base_dir / f
        try:
            base = load_spec(path).to_dict()
        except SpecError as e:
            raise SpecError(f"{where}: {e}") from None
        base.update(d)
    else:
        base = d
    for k, vals in vary.items():
        if not isinstance(vals, list) or not vals:
            raise SpecError(f"{where}.vary.{k}: must be a non-empty list of values")
    keys = list(vary)
    combos = itertools.product(*(vary[k] for k in keys)) if keys else [()]
    specs = []
    for combo in combos:
        inst = copy.deepcopy(base)
        name = inst.get("name", "")
        for k, val in zip(keys, combo):
            _set_field(inst, k, val, where)
            if isinstance(name, str):
                name = name.replace("{" + k + "}", _fmt(val))
        if keys:
            if not isinstance(name, str) or not name or "{" in name:
                raise SpecError(f"{where}.name: with `vary`, a template naming each varied field "
                                f"in braces is required, e.g. \"L{{lead_time}}\", got {name!r}")
            inst["name"] = name
        try:
            specs.append(spec_from_dict(inst))
        except SpecError as e:
            raise SpecError(f"{where}: {e}") from None
    return specs


def _fmt(v: Any) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v)


def _set_field(inst: dict[str, Any], key: str, val: Any, where: str) -> None:
    """Set `lead_time` or a nested field such as `demand.mean`."""
    parts = key.split(".")
    node = inst
    for p in parts[:-1]:
        nxt = node.get(p)
        if not isinstance(nxt, dict):
            raise SpecError(f"{where}.vary.{key}: {p!r} is not a table of the instance")
        node = nxt
    node[parts[-1]] = val


def _check_unique(items: list[Any], message: str) -> None:
    """SpecError with `message` (one {!r} for the label) when two items share a label."""
    seen: set[str] = set()
    for item in items:
        if item.label in seen:
            raise SpecError(message.format(item.label))
        seen.add(item.label)


def _policies(v: Any, default_seeds: tuple[int, ...]) -> tuple[PolicyEntry, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError("policies: need at least one [[policies]] entry")
    out = [_policy(_table(raw, f"policies[{i}]"), f"policies[{i}]", default_seeds)
           for i, raw in enumerate(v)]
    _check_unique(out, "policies: label {!r} is used twice; set `label` to tell them apart")
    return tuple(out)


def _policy(d: dict[str, Any], where: str, default_seeds: tuple[int, ...]) -> PolicyEntry:
    _known(d, POLICY_KEYS, where)
    kind = d.get("kind") or _infer_kind(d)
    if kind not in KINDS:
        raise SpecError(f"{where}.kind: must be one of {', '.join(KINDS)}, got {kind!r}")
    name = d.get("name", "")
    if not isinstance(name, str):
        raise SpecError(f"{where}.name: must be a string, got {name!r}")
    params = d.get("params")
    if params is not None:
        params = _table(params, f"{where}.params")
    settings = _table(d.get("settings"), f"{where}.settings")
    evaluation = _evaluation(d.get("evaluation", {}), f"{where}.evaluation")
    seeds = _seeds(d["seeds"], f"{where}.seeds") if "seeds" in d else default_seeds
    models = d.get("models", [])
    if not isinstance(models, list) or any(m not in MODELS for m in models):
        raise SpecError(f"{where}.models: must be a list from {', '.join(MODELS)}, got {models!r}")
    agent, steps, function, cpu = "", 0, "", 0.0
    if kind == "optimum":
        seeds = (0,)  # the certified optimum does not depend on a seed: one cell per instance
        name = "optimum"
    elif kind == "classical":
        if not name:
            raise SpecError(f"{where}.name: required for a classical policy")
        _check_classical(name, where)
    elif kind == "agent":
        agent = d.get("agent", "")
        if not isinstance(agent, str) or not agent:
            raise SpecError(f"{where}.agent: required for an agent entry, e.g. \"ppo\"")
        steps = _int(d.get("steps"), f"{where}.steps", 1)
        cpu = d.get("cpu_seconds", 0.0)
        if isinstance(cpu, bool) or not isinstance(cpu, (int, float)) or cpu < 0:
            raise SpecError(f"{where}.cpu_seconds: must be a number >= 0 (0: no cap), got {cpu!r}")
    else:
        function = d.get("function", "")
        if not isinstance(function, str) or ":" not in function:
            raise SpecError(f"{where}.function: required for a custom entry, as \"module:callable\"")
    label = d.get("label") or _default_label(kind, name, agent, function, params)
    if not isinstance(label, str):
        raise SpecError(f"{where}.label: must be a string, got {label!r}")
    return PolicyEntry(kind, label, name, params, agent, steps, settings, function, seeds, evaluation,
                       tuple(models), float(cpu))


def _infer_kind(d: Mapping[str, Any]) -> str:
    if "agent" in d:
        return "agent"
    if "function" in d:
        return "custom"
    if d.get("name") == "optimum":
        return "optimum"
    return "classical"


def _default_label(kind: str, name: str, agent: str, function: str, params: Any) -> str:
    if kind == "agent":
        return agent
    if kind == "custom":
        return name or function.rsplit(":", 1)[-1]
    if params:
        return f"{name}(" + ",".join(f"{k}={v}" for k, v in params.items()) + ")"
    return name


def _check_classical(name: str, where: str) -> None:
    from invbench.baselines.policies.registry import policy_names  # late: keeps suite loading light

    names = list(policy_names())
    if name not in names:
        raise SpecError(f"{where}.name: must be one of optimum, {', '.join(names)}, got {name!r}")
