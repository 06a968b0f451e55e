"""User policies named as "module:callable" or "path/to/file.py:callable": found relative to a
given folder (no PYTHONPATH needed), checked against the factory contract, keyed by a digest of
their source file, and optimised over their declared integer parameters when none are given.

The contract: `fn(spec, params=dict, seed=int, evaluation=dict)` returns a policy (anything with
`act(obs) -> orders`) or, in a suite only, a finished measurement (a mapping holding `cost`).
An optional attribute `fn.parameters = {"S": (lo, hi), ...}` declares integer ranges to search.
"""
from __future__ import annotations

import hashlib
import importlib
import importlib.machinery
import importlib.util
import inspect
import re
import sys
from pathlib import Path
from typing import Any, Callable, Mapping

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

_IDENT = r"[A-Za-z_][A-Za-z0-9_]*"
MODULE_REF_RE = re.compile(rf"{_IDENT}(\.{_IDENT})*:{_IDENT}")
FILE_REF_RE = re.compile(rf"[^\0:]+\.py:{_IDENT}")
EXPECTED = "fn(spec, params=..., seed=..., evaluation=...) returning an object with act(obs) -> orders"
#: Most points the parameter search may score (each is one exact evaluation).
MAX_SEARCH_POINTS = 2000
_loaded: dict[tuple[str, str], Any] = {}  # (file, digest) -> module, so an edited file is reloaded


def is_reference(text: str) -> bool:
    """True when `text` names a user policy ("module:callable" or "file.py:callable")."""
    return bool(MODULE_REF_RE.fullmatch(text) or FILE_REF_RE.fullmatch(text))


def source_file(ref: str, folder: str | Path) -> Path:
    """The source file `ref` points to, looked up from `folder` first, then sys.path."""
    if not is_reference(ref):
        raise SpecError(f"function: expected \"module.path:callable\" or \"file.py:callable\", got {ref!r}")
    target, _, _ = ref.rpartition(":")
    if target.endswith(".py"):
        path = Path(target).expanduser()
        path = path if path.is_absolute() else Path(folder) / path
        if not path.is_file():
            raise SpecError(f"function: file {str(path)!r} does not exist (expected a Python file "
                            f"defining the policy factory)")
        return path.resolve()
    parts = target.split(".")
    spec = importlib.machinery.PathFinder.find_spec(parts[0], [str(Path(folder).resolve())])
    if spec is not None:  # the folder first: a suite's own module wins over an installed namesake
        for part in parts[1:]:
            spec = importlib.machinery.PathFinder.find_spec(part, list(spec.submodule_search_locations or []))
            if spec is None:
                break
    if spec is None:  # installed modules, also those only an import hook knows (editable installs)
        spec = _installed(parts)
    if spec is None:
        raise SpecError(f"function: module {target!r} not found in {Path(folder).resolve()} or among the "
                        f"installed modules (expected {target.replace('.', '/')}.py there)")
    if spec is None or not spec.origin or not Path(spec.origin).is_file():
        raise SpecError(f"function: module {target!r} has no Python source file")
    return Path(spec.origin).resolve()


def _installed(parts: list[str]) -> Any:
    """Spec of an installed module by asking the import finders directly: unlike
    importlib.util.find_spec this ignores modules already imported (perhaps from another folder)."""
    spec, path = None, None
    for i in range(len(parts)):
        name = ".".join(parts[: i + 1])
        for finder in sys.meta_path:
            find = getattr(finder, "find_spec", None)
            try:
                spec = find(name, path) if find else None
            except Exception:  # a finder that cannot answer for this name
                spec = None
            if spec is not None:
                break
        if spec is None:
            return None
        path = list(spec.submodule_search_locations or [])
    return spec


def digest(path: Path) -> str:
    """Short sha256 of a source file: part of a cell's key, so an edit reruns its cells."""
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()[:16]
    except OSError as e:
        raise SpecError(f"function: {path} cannot be read ({e.strerror or e})") from None


def load_factory(ref: str, folder: str | Path) -> Callable[..., Any]:
    """The callable `ref` names, imported fresh when its source changed; one-line SpecError else."""
    path = source_file(ref, folder)
    key = (str(path), digest(path))
    attr = ref.rpartition(":")[2]
    mod = _loaded.get(key)
    if mod is None:
        mod = _import(ref, path, Path(folder).resolve())
        _loaded[key] = mod
    fn = getattr(mod, attr, None)
    if fn is None:
        raise SpecError(f"function: {ref!r}: module {mod.__name__} has no {attr!r} (expected a callable "
                        f"{EXPECTED})")
    if not callable(fn):
        raise SpecError(f"function: {ref!r} is a {type(fn).__name__}, not callable (expected {EXPECTED})")
    try:
        inspect.signature(fn).bind(None, params={}, seed=0, evaluation={})
    except TypeError:
        raise SpecError(f"function: {ref!r} has signature {_sig(fn)}; expected {EXPECTED}") from None
    except ValueError:
        pass  # a builtin without a readable signature: the call itself will tell
    parameters(fn, ref)
    return fn


def _sig(fn: Any) -> str:
    try:
        return f"{getattr(fn, '__name__', 'fn')}{inspect.signature(fn)}"
    except (TypeError, ValueError):
        return "unknown"


def _import(ref: str, path: Path, folder: Path) -> Any:
    target = ref.rpartition(":")[0]
    added = [str(p) for p in (folder, path.parent) if str(p) not in sys.path]
    sys.path[:0] = added  # the policy may import its neighbours; removed again below
    try:
        if target.endswith(".py"):
            name = f"invbench_user_{hashlib.sha256(str(path).encode()).hexdigest()[:12]}"
            spec = importlib.util.spec_from_file_location(name, path)
            mod = importlib.util.module_from_spec(spec)  # type: ignore[arg-type]
            sys.modules[name] = mod
            spec.loader.exec_module(mod)  # type: ignore[union-attr]
            return mod
        old = sys.modules.get(target)
        old_file = getattr(old, "__file__", None)
        if old is not None and old_file and Path(old_file).resolve() == path:
            return importlib.reload(old)  # the file changed since it was imported here
        if old is not None and "." not in target:
            del sys.modules[target]  # a namesake from another suite's folder: import this one
        mod = importlib.import_module(target)
        if not getattr(mod, "__file__", None) or Path(mod.__file__).resolve() != path:
            raise SpecError(f"function: module {target!r} is already imported from {mod.__file__}, not "
                            f"{path}; name the file instead (\"{path}:{ref.rpartition(':')[2]}\")")
        return mod
    except SpecError:
        raise
    except BaseException as e:  # a broken user module: one line, never a traceback
        if isinstance(e, KeyboardInterrupt):
            raise
        raise SpecError(f"function: importing {target!r} failed ({type(e).__name__}: "
                        f"{_first(e)}); expected a module defining {EXPECTED}") from None
    finally:
        for p in added:
            if p in sys.path:
                sys.path.remove(p)


def _first(e: BaseException) -> str:
    lines = str(e).strip().splitlines()
    return lines[0][:160] if lines else ""


def parameters(fn: Any, ref: str) -> dict[str, tuple[int, int]]:
    """The factory's declared integer ranges `{name: (lo, hi)}` (empty when it declares none)."""
    raw = getattr(fn, "parameters", None)
    if raw is None:
        return {}
    bad = SpecError(f"function: {ref!r}.parameters must be a dict {{name: (lo, hi)}} of integer ranges "
                    f"with lo <= hi, got {raw!r}"[:300])
    if not isinstance(raw, Mapping) or not raw:
        raise bad
    out = {}
    for k, v in raw.items():
        if (not isinstance(k, str) or not isinstance(v, (tuple, list)) or len(v) != 2
                or any(isinstance(x, bool) or not isinstance(x, int) for x in v) or v[0] > v[1]):
            raise bad
        out[k] = (int(v[0]), int(v[1]))
    return out


def build(fn: Callable[..., Any], ref: str, spec: InstanceSpec, params: Mapping[str, Any], seed: int,
          evaluation: Mapping[str, Any], measurement_ok: bool = False) -> Any:
    """Call the factory; a raise or a result without `act` is a one-line SpecError."""
    try:
        got = fn(spec, params=dict(params), seed=int(seed), evaluation=dict(evaluation))
    except SpecError as e:
        raise SpecError(f"function: {ref!r} refused params {dict(params)!r}: {_first(e)}") from None
    except Exception as e:
        # chained, so a failed cell's stored traceback shows where the user's code broke
        raise SpecError(f"function: {ref!r} raised {type(e).__name__}: {_first(e)} (with params "
                        f"{dict(params)!r})") from e
    if callable(getattr(got, "act", None)):
        return got
    if measurement_ok and (isinstance(got, Mapping) or hasattr(got, "to_dict")):
        return got
    what = "a policy with act(obs) -> orders" + (" or a mapping holding 'cost'" if measurement_ok else "")
    raise SpecError(f"function: {ref!r} returned {type(got).__name__}; expected {what}")


def optimise(fn: Callable[..., Any], ref: str, spec: InstanceSpec, seed: int,
             evaluation: Mapping[str, Any], progress: bool = False) -> tuple[Any, dict[str, int]]:
    """Best point of the declared ranges by exact evaluation (the classical policies' search)."""
    from invbench.baselines.policies._search import ExactScorer, pattern_search

    ranges = parameters(fn, ref)
    names = list(ranges)
    lo = [ranges[n][0] for n in names]
    hi = [ranges[n][1] for n in names]

    def point_params(x: tuple[int, ...]) -> dict[str, int]:
        return dict(zip(names, (int(v) for v in x)))

    def make(x: tuple[int, ...]) -> Any:
        if scorer.evaluations >= MAX_SEARCH_POINTS:
            from invbench.envs.errors import BudgetError
            raise BudgetError(f"function: parameter search stopped after {MAX_SEARCH_POINTS} evaluations")
        return build(fn, ref, spec, point_params(x), seed, evaluation)

    scorer = ExactScorer(spec, make, progress=progress, desc=ref.rpartition(":")[2])
    try:
        start = tuple((a + b) // 2 for a, b in zip(lo, hi))
        steps = tuple(max(1, (b - a) // 4) for a, b in zip(lo, hi))
        best, cost = pattern_search(scorer, start, steps,
                                    lambda x: tuple(min(max(v, a), b) for v, a, b in zip(x, lo, hi)))
        scorer.optimum(best)  # raises a one-line BudgetError when nothing could be evaluated
    finally:
        scorer.close()
    return build(fn, ref, spec, point_params(best), seed, evaluation), point_params(best)
