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

from . import suite_checks as check

SUITES_DIR = Path(__file__).resolve().parent / "suites"
#: Bumped when a cell's result format changes, so old results are not mistaken for new ones.
CELL_FORMAT = 1
KINDS = ("optimum", "classical", "agent", "custom")
SUITE_KEYS = ("name", "description", "seeds", "sweep", "invented")
_ANY_KIND = ("kind", "label", "seeds", "evaluation", "models")
#: The keys each kind of `[[policies]]` entry uses; any other key is refused as a likely slip.
KIND_KEYS = {"optimum": ("name", *_ANY_KIND),
             "classical": ("name", "params", *_ANY_KIND),
             "agent": ("agent", "steps", "settings", "cpu_seconds", *_ANY_KIND),
             "custom": ("function", "name", "params", "folder", "source_digest", *_ANY_KIND)}
POLICY_KEYS = tuple(dict.fromkeys(k for keys in KIND_KEYS.values() for k in keys))
INSTANCE_EXTRA_KEYS = ("file", "vary")
#: Most instances one `vary` grid may expand to.
MAX_GRID = 10_000


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
    folder: str = ""  # custom: the folder its module is imported from
    source_digest: str = ""  # custom: digest of its source file, so an edit reruns its cells

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"kind": self.kind, "label": self.label}
        for key in ("name", "agent", "function", "folder", "source_digest"):
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
    d.pop("folder", None)  # moving the suite's folder does not change the code (its digest stays)
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
        """All cells, optimum entries first so later cells can show their gap while running.

        Then the seed is the outer loop (policies in suite order, instances inside): a long run
        that is stopped part-way (agent suites take many CPU-hours) already has every policy's
        first seed on every instance, so its partial table compares all agents.
        """
        keyed = []
        for i, p in enumerate(self.policies):
            if p.kind in skip_kinds:
                continue
            ev = {**self.evaluation, **p.evaluation}
            specs = [spec for spec in self.instances if self._applies(p, spec)]
            for rank, seed in enumerate(p.seeds):
                keyed.extend(((p.kind != "optimum", rank, i, j), Cell(self.name, spec, p, seed, ev))
                             for j, spec in enumerate(specs))
        return [cell for _, cell in sorted(keyed, key=lambda kc: kc[0])]

    @staticmethod
    def _applies(p: PolicyEntry, spec: InstanceSpec) -> bool:
        if p.models and spec.model not in p.models:
            return False
        if p.kind == "classical" and not _supports(p.name, spec):
            return False  # the policy is not defined for this model or lead time
        if p.kind == "optimum" and spec.model_def.simulation_only(spec):
            return False  # no exact optimum (e.g. lead times that may cross)
        return True

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
        if not check.NAME_RE.fullmatch(str(source)) or not cand.is_file():
            raise SpecError(f"suite: {str(source)!r} is neither a file nor a packaged suite "
                            f"(packaged: {', '.join(packaged_suites())})")
        path = cand
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise SpecError(f"suite: {path} cannot be read ({e.strerror or e})") from None
    try:
        txt = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        raise SpecError(f"suite: {path} is not UTF-8 text (byte 0x{raw[e.start]:02x} at offset {e.start}); "
                        f"a suite is a TOML file") from None
    try:
        data = tomllib.loads(txt)
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"suite: {path} is not valid TOML ({check.first_line(e)})") from None
    return suite_from_dict(data, base_dir=path.parent, source=str(path))


def suite_from_dict(data: Mapping[str, Any], base_dir: Path | None = None, source: str = "") -> Suite:
    """A validated Suite; any problem is a one-line SpecError naming the field."""
    try:
        return _suite_from_dict(data, base_dir, source)
    except SpecError as e:
        raise check.one_line(e) from None


def _suite_from_dict(data: Mapping[str, Any], base_dir: Path | None, source: str) -> Suite:
    data = check.table(data, "suite file", required=True)
    for key in data:
        if key not in ("suite", "evaluation", "instances", "policies"):
            raise SpecError(f"{check.key(key)}: unknown top-level key (allowed: suite, evaluation, instances, policies)")
    head = check.table(data.get("suite"), "suite", required=True)
    check.known(head, SUITE_KEYS, "suite")
    name = check.name(head.get("name"), "suite.name")
    desc = check.text(head.get("description", ""), "suite.description")
    seeds = check.seeds(head.get("seeds", [0]), "suite.seeds")
    sweep = head.get("sweep", "")
    if not isinstance(sweep, str) or sweep not in ("", "lead_time"):
        raise SpecError(f"suite.sweep: must be \"lead_time\" or absent, got {check.short(sweep)}")
    invented = head.get("invented", False)
    if not isinstance(invented, bool):
        raise SpecError(f"suite.invented: must be true or false, got {check.short(invented)}")
    evaluation = check.evaluation(data.get("evaluation", {}), "evaluation")
    instances = _instances(data.get("instances"), base_dir or Path.cwd())
    policies = _policies(data.get("policies"), seeds, instances, base_dir or Path.cwd())
    return Suite(name, desc, instances, policies, evaluation, sweep, invented, source)


def _instances(v: Any, base_dir: Path) -> tuple[InstanceSpec, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError("instances: need at least one [[instances]] entry")
    out: list[InstanceSpec] = []
    for i, raw in enumerate(v):
        where = f"instances[{i}]"
        d = check.table(raw, where)
        for spec in _expand(d, where, base_dir):
            out.append(spec)
        if len(out) > MAX_GRID:
            raise SpecError(f"instances: more than {MAX_GRID} instances (at {where}); split the suite")
    _check_unique(out, "instances: name {!r} is used twice; give each instance its own name")
    return tuple(out)


def _expand(d: dict[str, Any], where: str, base_dir: Path) -> list[InstanceSpec]:
    """One entry -> specs: inline, from `file =`, and/or a grid over `vary = {field = [values]}`."""
    vary = check.table(d.pop("vary", None), f"{where}.vary")
    if "file" in d:
        f = d.pop("file")
        if not isinstance(f, str) or not f or "\0" in f:
            raise SpecError(f"{where}.file: must be a path string, got {check.short(f)}")
        path = Path(f) if Path(f).is_absolute() else base_dir / f
        if not path.is_file():
            raise SpecError(f"{where}.file: {str(path)!r} is not a file")
        try:
            base = load_spec(path).to_dict()
        except SpecError as e:
            raise SpecError(f"{where}: {e}") from None
        except (OSError, ValueError, TypeError, KeyError, AttributeError) as e:  # unreadable, not UTF-8, ...
            raise SpecError(f"{where}.file: {path} cannot be read as a spec file ({check.first_line(e)})") from None
        base.update(d)
    else:
        base = d
    grid = 1
    for k, vals in vary.items():
        if not isinstance(vals, list) or not vals:
            raise SpecError(f"{where}.vary.{check.key(k)}: must be a non-empty list of values, got {check.short(vals)}")
        grid *= len(vals)
        if grid > MAX_GRID:
            raise SpecError(f"{where}.vary: expands to more than {MAX_GRID} instances; split the grid")
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
                                f"in braces is required, e.g. \"L{{lead_time}}\", got {check.short(name)}")
            inst["name"] = name
        try:
            specs.append(spec_from_dict(inst))
        except SpecError as e:
            raise SpecError(f"{where}: {e}") from None
        except (TypeError, ValueError, KeyError, AttributeError, OverflowError) as e:
            # the spec loader should have named the field; still one line, never a traceback
            raise SpecError(f"{where}: not a valid instance ({type(e).__name__}: {check.first_line(e)})") from None
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
            raise SpecError(f"{where}.vary.{check.key(key)}: {p!r} is not a table of the instance")
        node = nxt
    node[parts[-1]] = val


def _check_unique(items: list[Any], message: str) -> None:
    """SpecError with `message` (one {!r} for the label) when two items share a label."""
    seen: set[str] = set()
    for item in items:
        if item.label in seen:
            raise SpecError(message.format(item.label))
        seen.add(item.label)


def _policies(v: Any, default_seeds: tuple[int, ...], instances: tuple[InstanceSpec, ...],
              base_dir: Path) -> tuple[PolicyEntry, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError("policies: need at least one [[policies]] entry")
    out = [_policy(check.table(raw, f"policies[{i}]"), f"policies[{i}]", default_seeds, instances, base_dir)
           for i, raw in enumerate(v)]
    _check_unique(out, "policies: label {!r} is used twice; set `label` to tell them apart")
    return tuple(out)


def _policy(d: dict[str, Any], where: str, default_seeds: tuple[int, ...],
            instances: tuple[InstanceSpec, ...], base_dir: Path) -> PolicyEntry:
    check.known(d, POLICY_KEYS, where)
    kind = d.get("kind") or _infer_kind(d)
    if not isinstance(kind, str) or kind not in KINDS:
        raise SpecError(f"{where}.kind: must be one of {', '.join(KINDS)}, got {check.short(kind)}")
    check.known(d, KIND_KEYS[kind], where)
    name = check.text(d.get("name", ""), f"{where}.name")
    params = d.get("params")
    if params is not None:
        params = check.table(params, f"{where}.params")
    settings = check.table(d.get("settings"), f"{where}.settings")
    evaluation = check.evaluation(d.get("evaluation", {}), f"{where}.evaluation")
    seeds = check.seeds(d["seeds"], f"{where}.seeds") if "seeds" in d else default_seeds
    models = d.get("models", [])
    if not isinstance(models, list) or any(not isinstance(m, str) or m not in MODELS for m in models):
        raise SpecError(f"{where}.models: must be a list from {', '.join(MODELS)}, got {check.short(models)}")
    agent, steps, function, cpu, folder, digest = "", 0, "", 0.0, "", ""
    if kind == "optimum":
        if name not in ("", "optimum"):
            raise SpecError(f"{where}.name: an optimum entry is named \"optimum\", got {check.short(name)}")
        seeds = (0,)  # the certified optimum does not depend on a seed: one cell per instance
        name = "optimum"
    elif kind == "classical":
        if not name:
            raise SpecError(f"{where}.name: required for a classical policy")
        check.classical(name, params, [s for s in instances if not models or s.model in models], where)
    elif kind == "agent":
        agent = d.get("agent", "")
        check.agent(agent, settings, where)
        steps = check.integer(d.get("steps"), f"{where}.steps", 1, 10**12)
        cpu = check.number(d.get("cpu_seconds", 0.0), f"{where}.cpu_seconds", 0.0, 10.0**9, " (0: no cap)")
    else:
        function, folder, digest = check.custom(d, where, base_dir)
    label = d.get("label") or _default_label(kind, name, agent, function, params)
    check.text(label, f"{where}.label")
    return PolicyEntry(kind, label, name, params, agent, steps, settings, function, seeds, evaluation,
                       tuple(models), float(cpu), folder, digest)


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


def _supports(policy: str, model: "str | InstanceSpec") -> bool:
    from invbench.baselines.policies.registry import supports  # late: keeps loading light
    return supports(policy, model)
