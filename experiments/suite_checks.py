"""The checks a suite file goes through when it is loaded, so that a bad value stops the run at
once with one line naming the field, instead of failing its cells hours later.

Classical policy parameters are checked by building each policy through the public registry
(`baselines.policies.registry.make_policy`), agent settings by the agents' own validation
(`agents.training.resolve_settings`): the rules live with the code that uses the values.
"""
from __future__ import annotations

import math
import re
from typing import Any, Iterable, Mapping

from invbench.envs.errors import BudgetError, SpecError

#: A suite name becomes a folder name (runs/NAME): a plain word, never "." or "..".
NAME_RE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,99}")
MAX_SEED = 2**32 - 1  # the agents' seed range, used for every cell so seeds mean the same everywhere
EVAL_METHODS = ("auto", "exact", "simulate")
#: evaluation key -> (lowest, highest); the simulator needs two replications for a CI
EVAL_RANGES = {"replications": (2, 10**6), "periods": (1, 10**8), "warmup": (0, 10**8)}
EVAL_KEYS = ("method", *EVAL_RANGES)


def table(v: Any, where: str, required: bool = False) -> dict[str, Any]:
    if v is None and not required:
        return {}
    if not isinstance(v, Mapping):
        raise SpecError(f"{where}: must be a table" + (" (required)" if required else "") +
                        f", got {short(v)}")
    for k in v:
        if not isinstance(k, str):
            raise SpecError(f"{where}: keys must be strings, got {short(k)}")
    return dict(v)


def known(d: Mapping[str, Any], allowed: Iterable[str], where: str) -> None:
    allowed = tuple(allowed)
    for k in d:
        if k not in allowed:
            raise SpecError(f"{where}.{key(k)}: unknown key (allowed: {', '.join(allowed)})")


def key(k: Any) -> str:
    """A key as it appears in a field path: plain when it is a plain word, else quoted."""
    return k if isinstance(k, str) and re.fullmatch(r"[\w.-]+", k) else repr(k)


def one_line(e: SpecError) -> SpecError:
    """The same error with any line break (from a key or value quoted in it) escaped."""
    msg = str(e)
    return e if "\n" not in msg and "\r" not in msg else SpecError(msg.replace("\r", "\\r").replace("\n", "\\n"))


def integer(v: Any, where: str, lo: int, hi: int | None = None) -> int:
    rng = f"an integer in [{lo}, {hi}]" if hi is not None else f"an integer >= {lo}"
    if isinstance(v, bool) or not isinstance(v, int) or v < lo or (hi is not None and v > hi):
        raise SpecError(f"{where}: must be {rng}, got {short(v)}")
    return v


def number(v: Any, where: str, lo: float, hi: float, note: str = "") -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or not lo <= v <= hi:
        raise SpecError(f"{where}: must be a number in [{lo:g}, {hi:g}]{note}, got {short(v)}")
    return float(v)


def name(v: Any, where: str) -> str:
    if not isinstance(v, str) or not NAME_RE.fullmatch(v):
        raise SpecError(f"{where}: required, 1 to 100 letters, digits, '.', '_' or '-', starting with a "
                        f"letter or digit (it names the results folder), got {short(v)}")
    return v


def text(v: Any, where: str) -> str:
    if not isinstance(v, str):
        raise SpecError(f"{where}: must be a string, got {short(v)}")
    return v


def seeds(v: Any, where: str) -> tuple[int, ...]:
    if not isinstance(v, list) or not v:
        raise SpecError(f"{where}: must be a non-empty list of integers in [0, {MAX_SEED}], got {short(v)}")
    out = tuple(integer(s, where, 0, MAX_SEED) for s in v)
    if len(set(out)) != len(out):
        raise SpecError(f"{where}: seeds must be distinct, got {short(list(out))}")
    return out


def evaluation(v: Any, where: str) -> dict[str, Any]:
    d = table(v, where)
    out: dict[str, Any] = {}
    for k, val in d.items():
        if k not in EVAL_KEYS:
            raise SpecError(f"{where}.{key(k)}: unknown key (allowed: {', '.join(EVAL_KEYS)})")
        if k == "method":
            if not isinstance(val, str) or val not in EVAL_METHODS:
                raise SpecError(f"{where}.method: must be one of {', '.join(EVAL_METHODS)}, got {short(val)}")
            out[k] = val
        else:
            out[k] = integer(val, f"{where}.{k}", *EVAL_RANGES[k])
    return out


def function(v: Any, where: str) -> str:
    from invbench.baselines.custom import is_reference  # late: keeps loading light

    if not isinstance(v, str) or not is_reference(v):
        raise SpecError(f"{where}: required for a custom entry, as \"module.path:callable\" or "
                        f"\"file.py:callable\" (found from the suite's folder), got {short(v)}")
    return v


def custom(d: Mapping[str, Any], where: str, base_dir: Any) -> tuple[str, str, str]:
    """(function, folder it is imported from, digest of its source file) of a custom entry.

    The digest goes into the cell key so that editing the policy reruns its cells. A results
    folder's copy of the suite carries `folder` and `source_digest` as run; a source that
    cannot be found now gives the digest "missing" and its cells fail with one line.
    """
    from pathlib import Path

    from invbench.baselines.custom import digest, source_file

    ref = function(d.get("function", ""), f"{where}.function")
    folder = d.get("folder", str(Path(base_dir).resolve()))
    if not isinstance(folder, str) or not folder or "\0" in folder:
        raise SpecError(f"{where}.folder: must be a folder path string, got {short(folder)}")
    fixed = d.get("source_digest")
    if fixed is not None:
        if not isinstance(fixed, str) or not re.fullmatch(r"[0-9a-f]{16}|missing", fixed):
            raise SpecError(f"{where}.source_digest: written by the bench (16 hex digits); leave it out, got {short(fixed)}")
        return ref, folder, fixed
    try:
        return ref, folder, digest(source_file(ref, folder))
    except SpecError:
        return ref, folder, "missing"


def classical(policy: str, params: Mapping[str, Any] | None, specs: Iterable[Any], where: str) -> None:
    """The name is a registered policy; given parameters build a policy on every instance."""
    from invbench.baselines.policies.registry import make_policy, policy_names, supports  # late: keeps loading light

    names = list(policy_names())
    if policy not in names:
        raise SpecError(f"{where}.name: must be one of optimum, {', '.join(names)}, got {short(policy)}")
    if not params:
        return  # optimised per instance when the cell runs
    for k in params:
        if key(k) != k:  # not a plain word: no parameter is called that
            raise SpecError(f"{where}.params.{key(k)}: unknown parameter for {policy}")
    for spec in specs:
        if not supports(policy, spec):
            continue  # never paired with this instance (see Suite.cells)
        try:
            make_policy(spec, policy, params)
        except (SpecError, BudgetError) as e:
            msg = str(e)
            if msg.startswith("param."):
                msg = f"params.{msg[len('param.'):]}"
            raise SpecError(f"{where}.{msg} (instance {spec.label})") from None
        except (TypeError, ValueError, OverflowError) as e:
            raise SpecError(f"{where}.params: not usable by {policy} on instance {spec.label} "
                            f"({type(e).__name__}: {first_line(e)})") from None


def agent(agent_name: Any, settings: Mapping[str, Any], where: str) -> None:
    """A known agent, and settings its own validation accepts (with the bench's defaults)."""
    if not isinstance(agent_name, str) or not agent_name:
        raise SpecError(f"{where}.agent: required for an agent entry, e.g. \"ppo\", got {short(agent_name)}")
    try:
        from invbench.agents.training import resolve_settings
    except ImportError:
        return  # no agents part here: its cells fail with a clear line (or use --skip-agents)
    for k in settings:
        if key(k) != k:  # not a plain word: no setting is called that
            raise SpecError(f"{where}.settings.{key(k)}: unknown setting for agent {agent_name!r}")
    try:
        resolve_settings(agent_name, {"progress": False, "threads": 1, **settings})
    except SpecError as e:
        msg = str(e)
        if msg.startswith("agent."):
            raise SpecError(f"{where}.settings.{msg[len('agent.'):]}") from None
        if msg.startswith("agent:"):
            raise SpecError(f"{where}.agent:{msg[len('agent:'):]}") from None
        raise SpecError(f"{where}.settings: {msg}") from None


def first_line(e: BaseException) -> str:
    lines = str(e).strip().splitlines()
    return lines[0][:160] if lines else ""


def short(v: Any) -> str:
    txt = repr(v)
    return txt if len(txt) <= 60 else txt[:57] + "..."
