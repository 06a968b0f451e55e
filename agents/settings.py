"""Training settings of the agents: one dataclass per agent family, validated on every change.

Values come from the defaults here, then a TOML `[agent]` table, then `--set key=value` pairs;
each bad value raises a one-line `SpecError` naming `agent.<key>` and its allowed range.
"""
from __future__ import annotations

import dataclasses
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence, TypeVar

from invbench.envs.errors import SpecError

AUTO = "auto"
SB3_AGENTS = ("ppo", "a2c", "dqn")
#: Losses DQN can fit its Q-values with (agents/dqn_loss.py applies them).
TD_LOSSES = ("squared", "huber")


def setting(default: Any, kind: str, doc: str, lo: float | None = None, hi: float | None = None,
       lo_open: bool = False, auto: bool = False, choices: tuple[str, ...] = (),
       agents: tuple[str, ...] = ()) -> Any:
    """A dataclass field carrying its own validation rule (kind: int, float, bool, str, ints)."""
    meta = dict(kind=kind, doc=doc, lo=lo, hi=hi, lo_open=lo_open, auto=auto, choices=choices, agents=agents)
    return field(default=default, metadata=meta)


@dataclass
class CommonSettings:
    """Settings every agent shares: network, instance-derived scaling, evaluation, logging."""

    threads: int = setting(1, "int", "torch CPU threads (the networks are small: a second thread mostly spins)", 1, 64)
    hidden: tuple[int, ...] = setting((64, 64), "ints", "hidden layer widths of the policy network", 1, 4096)
    activation: str = setting("tanh", "str", "hidden activation", choices=("tanh", "relu"))
    obs_scale: Any = setting(AUTO, "float", "observation divisor (auto: mean demand per period)", 0.0, None, True, auto=True)
    obs_clip: float = setting(10.0, "float", "clip scaled observations to +-this (0: no clipping)", 0.0, None)
    reward_scale: Any = setting(AUTO, "float", "cost divisor for rewards (auto: reference cost)", 0.0, None, True, auto=True)
    reward_offset: Any = setting(AUTO, "float", "cost subtracted before scaling (auto: reference cost)", None, None, auto=True)
    max_order_units: Any = setting(AUTO, "int", "largest order the agent may place (auto: demand quantile)", 1, None, auto=True)
    position_cap: Any = setting(AUTO, "int", "largest inventory position after ordering (auto: from the instance, 0: none)", 0, None, auto=True)
    position_floor: bool = setting(False, "bool", "keep the inventory position after ordering at or above an automatic floor where unmet demand is backordered (a margin below the optimal policy's lowest; DQN: on by default)", agents=("dqn",))
    order_quantile: float = setting(0.9999, "float", "demand quantile giving the automatic order bound", 0.5, 1.0, True)
    episode_length: int = setting(500, "int", "periods per training episode", 1, 10**7)
    eval_every: Any = setting(AUTO, "int", "training steps between learning-curve points (auto: at policy updates, up to 20, within 10 % of the training CPU)", 1, None, auto=True)
    eval_replications: int = setting(32, "int", "replications of each learning-curve evaluation", 2, 10**6)
    eval_periods: int = setting(1000, "int", "measured periods per replication", 1, 10**7)
    eval_warmup: int = setting(100, "int", "periods discarded before measuring", 0, 10**7)
    eval_seed: int = setting(20_240_601, "int", "seed of the common random numbers of the learning curve", 0, 2**63 - 1)
    curve_exact: bool = setting(True, "bool", "also evaluate learning-curve points exactly when the chain is small")
    curve_exact_max_states: int = setting(200_000, "int", "state budget of those exact evaluations", 1, 10**8)
    checkpoint_every: Any = setting(AUTO, "int", "training steps between checkpoints (auto: 5 per run, 0: none)", 0, None, auto=True)
    progress: bool = setting(True, "bool", "show a progress bar")


@dataclass
class SB3Settings(CommonSettings):
    """Settings of the stable-baselines3 agents; `auto` picks the agent's own default."""

    n_envs: Any = setting(AUTO, "int", "copies stepped together in the batch simulator", 1, 100_000, auto=True)
    learning_rate: Any = setting(AUTO, "float", "optimiser step size", 0.0, 1.0, True, auto=True)
    gamma: float = setting(0.99, "float", "discount of the training objective", 0.0, 1.0, True)
    n_steps: Any = setting(AUTO, "int", "steps per env per rollout", 1, 10**6, auto=True, agents=("ppo", "a2c"))
    batch_size: int = setting(512, "int", "minibatch size", 1, 10**7, agents=("ppo", "dqn"))
    n_epochs: int = setting(10, "int", "passes over each rollout", 1, 1000, agents=("ppo",))
    gae_lambda: Any = setting(AUTO, "float", "GAE lambda", 0.0, 1.0, auto=True, agents=("ppo", "a2c"))
    clip_range: float = setting(0.2, "float", "PPO clip range", 0.0, 1.0, True, agents=("ppo",))
    ent_coef: float = setting(0.0, "float", "entropy bonus", 0.0, 1.0, agents=("ppo", "a2c"))
    vf_coef: float = setting(0.5, "float", "value loss weight", 0.0, 100.0, agents=("ppo", "a2c"))
    max_grad_norm: float = setting(0.5, "float", "gradient clipping norm", 0.0, None, True, agents=("ppo", "a2c"))
    buffer_size: int = setting(200_000, "int", "replay buffer size", 1, 10**8, agents=("dqn",))
    learning_starts: int = setting(5_000, "int", "steps before the first update", 0, 10**9, agents=("dqn",))
    exploration_fraction: float = setting(0.3, "float", "share of training with decaying epsilon (of the CPU budget when that ends the run first)", 0.0, 1.0, agents=("dqn",))
    exploration_final_eps: float = setting(0.02, "float", "final epsilon", 0.0, 1.0, agents=("dqn",))
    target_update_interval: int = setting(2_000, "int", "steps between target-network updates", 1, 10**9, agents=("dqn",))
    train_freq: int = setting(4, "int", "env steps (per copy) between updates", 1, 10**6, agents=("dqn",))
    gradient_steps: int = setting(4, "int", "gradient steps per update", 1, 10**4, agents=("dqn",))
    td_loss: str = setting("squared", "str", "loss on the TD error: squared (estimates the expected cost) or huber (SB3's own)", choices=TD_LOSSES, agents=("dqn",))
    lr_final_share: float = setting(0.0, "float", "learning rate at the end of the run as a share of learning_rate (linear decay over the run, counted in CPU when the CPU budget ends it)", 0.0, 1.0, agents=("dqn",))


# Per-agent choices for the `auto` fields, measured on the classic lost-sales grid (see README).
AGENT_DEFAULTS: dict[str, dict[str, Any]] = {
    "ppo": dict(n_envs=64, learning_rate=3e-4, n_steps=64, gae_lambda=0.95),
    "a2c": dict(n_envs=64, learning_rate=7e-4, n_steps=8, gae_lambda=1.0),
    "dqn": dict(n_envs=16, learning_rate=1e-4, hidden=(64, 64), activation="relu", position_floor=True),
}

S = TypeVar("S", bound=CommonSettings)


def _range_text(lo: Any, hi: Any, lo_open: bool) -> str:
    if lo is not None and hi is not None:
        return f"in {'(' if lo_open else '['}{lo:g}, {hi:g}]"
    if lo is not None:
        return f"{'>' if lo_open else '>='} {lo:g}"
    if hi is not None:
        return f"<= {hi:g}"
    return ""


def coerce(name: str, value: Any, meta: Mapping[str, Any]) -> Any:
    """Validate and convert one setting value; strings from the command line are parsed here."""
    kind, key = meta["kind"], f"agent.{name}"
    if meta["auto"] and isinstance(value, str) and value.strip().lower() == AUTO:
        return AUTO
    if kind == "bool":
        if isinstance(value, str) and value.strip().lower() in ("true", "1", "yes", "false", "0", "no"):
            return value.strip().lower() in ("true", "1", "yes")
        if isinstance(value, bool):
            return value
        raise SpecError(f"{key}: must be true or false, got {value!r}")
    if kind == "str":
        if not isinstance(value, str) or value not in meta["choices"]:
            raise SpecError(f"{key}: must be one of {', '.join(meta['choices'])}, got {value!r}")
        return value
    if kind == "ints":
        if isinstance(value, str):
            parts = [p for p in value.replace(" ", "").split(",") if p]
            value = parts
        if not isinstance(value, (list, tuple)) or not value:
            raise SpecError(f"{key}: must be a non-empty list of integers, e.g. 64,64, got {value!r}")
        return tuple(coerce(name, v, {**meta, "kind": "int", "auto": False}) for v in value)
    return _number(key, value, kind == "int", meta)


def _number(key: str, value: Any, integer: bool, meta: Mapping[str, Any]) -> Any:
    lo, hi, lo_open = meta["lo"], meta["hi"], meta["lo_open"]
    rng = _range_text(lo, hi, lo_open)
    auto_txt = " or auto" if meta["auto"] else ""
    want = f"{'an integer' if integer else 'a number'}{' ' + rng if rng else ''}{auto_txt}"  # every refusal states the range
    if isinstance(value, str):
        try:
            value = float(value.strip())
        except ValueError:
            raise SpecError(f"{key}: must be {want}, got {value!r}") from None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise SpecError(f"{key}: must be {want}, got {value!r}")
    try:
        finite = math.isfinite(float(value))
    except OverflowError:
        finite = False
    if not finite:
        raise SpecError(f"{key}: must be a finite {want.split(' ', 1)[1]}, got {value}")
    if integer:
        if float(value) != int(value):
            raise SpecError(f"{key}: must be {want}, got {value}")
        value = int(value)
    else:
        value = float(value)
    if (lo is not None and (value < lo or (lo_open and value <= lo))) or (hi is not None and value > hi):
        raise SpecError(f"{key}: must be {rng}{auto_txt}, got {value:g}")
    return value


def field_meta(cls: type) -> dict[str, Mapping[str, Any]]:
    return {f.name: f.metadata for f in dataclasses.fields(cls) if f.metadata}


def apply_overrides(settings: S, overrides: Mapping[str, Any] | None, agent: str) -> S:
    """A copy of `settings` with `overrides` validated and applied; unknown keys are refused."""
    metas = field_meta(type(settings))
    changes: dict[str, Any] = {}
    for name, value in (overrides or {}).items():
        if name not in metas:
            raise SpecError(f"agent.{name}: unknown setting for agent {agent!r} (allowed: {', '.join(sorted(metas))})")
        used_by = metas[name]["agents"]
        if used_by and agent not in used_by:
            raise SpecError(f"agent.{name}: not used by agent {agent!r} (only by {', '.join(used_by)})")
        changes[name] = coerce(name, value, metas[name])
    return dataclasses.replace(settings, **changes)


def sb3_settings(agent: str, overrides: Mapping[str, Any] | None = None) -> SB3Settings:
    """SB3 settings for `agent` with its defaults and the user's overrides; `auto` fields resolved."""
    if agent not in SB3_AGENTS:
        raise SpecError(f"agent: must be one of {', '.join(SB3_AGENTS)}, got {agent!r}")
    s = apply_overrides(SB3Settings(), AGENT_DEFAULTS[agent], agent)
    user = dict(overrides or {})
    s = apply_overrides(s, user, agent)
    # user `auto` on an agent-default field means "the agent's default"
    back = {k: v for k, v in AGENT_DEFAULTS[agent].items() if user.get(k) == AUTO}
    return apply_overrides(s, back, agent)


def parse_set(pairs: Sequence[str]) -> dict[str, Any]:
    """`["learning_rate=1e-3", "hidden=128,128"]` -> dict of raw strings (validated later)."""
    out: dict[str, Any] = {}
    for p in pairs:
        if "=" not in p:
            raise SpecError(f"--set: must look like key=value, got {p!r}")
        k, v = p.split("=", 1)
        k = k.strip()
        if k.startswith("agent."):
            k = k[len("agent."):]
        if not k:
            raise SpecError(f"--set: missing key in {p!r}")
        out[k] = v.strip()
    return out


#: Keys of the TOML [agent] table that are not settings but run defaults.
RUN_KEYS = ("name", "steps", "seed")


def agent_table(path: str | Path) -> dict[str, Any]:
    """The `[agent]` table of a spec file (empty when absent); the instance loader ignores it."""
    p = Path(path)
    if not p.is_file():
        return {}
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except UnicodeDecodeError as e:
        raise SpecError(f"spec file: {p} is not UTF-8 text (byte at offset {e.start}); save it as UTF-8") from None
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"spec file: {p} is not valid TOML ({e})") from None
    table = data.get("agent", {})
    if not isinstance(table, dict):
        raise SpecError("agent: must be a table")
    return dict(table)


def to_jsonable(settings: CommonSettings) -> dict[str, Any]:
    return {k: (list(v) if isinstance(v, tuple) else v) for k, v in dataclasses.asdict(settings).items()}


def describe_settings(settings: CommonSettings, agent: str) -> list[tuple[str, Any, str]]:
    """(name, value, doc) of every setting `agent` uses, valued as in `settings` (for
    `--list-settings`: the agent's own defaults, e.g. DQN's ReLU network, not the class's)."""
    out = []
    for f in dataclasses.fields(settings):
        used_by = f.metadata.get("agents", ()) if f.metadata else ()
        if f.metadata and (not used_by or agent in used_by):
            out.append((f.name, getattr(settings, f.name), f.metadata["doc"]))
    return out
