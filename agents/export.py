"""Safe export and import of learned policies: safetensors weights plus a JSON description.

A policy directory holds `weights.safetensors` (plain tensors, loaded without unpickling) and
`policy.json` (instance, scaling, architecture, training settings, versions, measured cost).
On import, anything unexpected is refused with a one-line `PolicyFileError`: a pickle or zip in
place of the weights, a checksum or digest that does not match, tensors that do not fit the
architecture, or an instance of another shape than the one asked for. Nothing is unpickled.
"""
from __future__ import annotations

import hashlib
import json
import os
import platform
import tempfile
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, spec_from_dict

FORMAT = "invbench-learned-policy"
FORMAT_VERSION = 1
WEIGHTS = "weights.safetensors"
META = "policy.json"
MAX_HEADER = 1 << 20  # a header this large is not one of ours


class PolicyFileError(SpecError):
    """A policy directory is missing, tampered with, or does not fit the instance."""


def _umask() -> int:
    """The process umask (read without changing it where /proc allows; else set and restored)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _atomic_write(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        # mkstemp creates 0600; the result is an ordinary file, so give it the usual umask mode
        os.fchmod(fd, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_json_atomic(path: str | Path, obj: Any) -> None:
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    _atomic_write(p, (json.dumps(obj, indent=2, sort_keys=True, default=_json_default) + "\n").encode())


def _json_default(o: Any) -> Any:
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, (np.floating,)):
        return float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, tuple):
        return list(o)
    raise TypeError(f"not JSON-able: {type(o).__name__}")


def versions() -> dict[str, str]:
    import gymnasium
    import torch

    import invbench
    out = {"invbench": invbench.__version__, "python": platform.python_version(), "numpy": np.__version__,
           "torch": torch.__version__, "gymnasium": gymnasium.__version__}
    try:
        import stable_baselines3
        out["stable_baselines3"] = stable_baselines3.__version__
    except ImportError:  # pragma: no cover - a dependency, but the export does not need it
        pass
    return out


def _digest(meta: Mapping[str, Any]) -> str:
    """Hash of the parts that define the policy, so an edited policy.json is noticed."""
    core = {k: meta[k] for k in ("instance", "scaling", "architecture", "weights")}
    return hashlib.sha256(json.dumps(core, sort_keys=True).encode()).hexdigest()


def save_policy(policy: Any, directory: str | Path, measured: Mapping[str, Any] | None = None) -> Path:
    """Write `policy` (a LearnedPolicy) to `directory`; both files are replaced atomically."""
    from safetensors.torch import save

    d = Path(directory)
    d.mkdir(parents=True, exist_ok=True)
    tensors = policy.net.named_tensors()
    blob = save(tensors, metadata={"format": FORMAT, "architecture": json.dumps(policy.net.arch, sort_keys=True)})
    meta: dict[str, Any] = {
        "format": FORMAT, "format_version": FORMAT_VERSION, "agent": policy.agent,
        "instance": policy.spec.to_dict(), "scaling": policy.scaling.to_dict(), "architecture": dict(policy.net.arch),
        "weights": {"file": WEIGHTS, "sha256": hashlib.sha256(blob).hexdigest(),
                    "tensors": {k: list(v.shape) for k, v in tensors.items()}},
        "training": policy.meta.get("training", {}), "versions": versions(),
        "measured": dict(measured if measured is not None else policy.meta.get("measured", {})),
    }
    meta["digest"] = _digest(meta)
    _atomic_write(d / WEIGHTS, blob)
    write_json_atomic(d / META, meta)
    return d


def _refuse(msg: str) -> None:
    raise PolicyFileError(msg)


def _read_meta(d: Path) -> dict[str, Any]:
    p = d / META
    if not p.is_file():
        _refuse(f"policy: {d} has no {META} (not an exported policy directory)")
    try:
        meta = json.loads(p.read_text())
    except (UnicodeDecodeError, json.JSONDecodeError) as e:
        _refuse(f"policy: {p} is not valid JSON ({e.__class__.__name__})")
    if not isinstance(meta, dict) or meta.get("format") != FORMAT:
        _refuse(f"policy: {p} is not an invbench policy file (format must be {FORMAT!r})")
    if meta.get("format_version") != FORMAT_VERSION:
        _refuse(f"policy: {p} format_version must be {FORMAT_VERSION}, got {meta.get('format_version')!r}")
    for key in ("instance", "scaling", "architecture", "weights", "digest"):
        if key not in meta:
            _refuse(f"policy: {p} lacks the {key!r} entry")
    if meta["digest"] != _digest(meta):
        _refuse(f"policy: {p} was edited after export (digest does not match its contents)")
    return meta


def _read_weights(d: Path, meta: Mapping[str, Any], shapes: Mapping[str, tuple[int, ...]]) -> dict[str, Any]:
    from safetensors import SafetensorError
    from safetensors.torch import load

    p = d / WEIGHTS
    if not p.is_file():
        _refuse(f"policy: {d} has no {WEIGHTS}")
    blob = p.read_bytes()
    # safetensors: 8-byte little-endian header length, then a JSON header starting with "{".
    # Test that first: a header length such as 0x280 also starts with the pickle byte 0x80.
    n = int.from_bytes(blob[:8], "little") if len(blob) >= 8 else -1
    if not (0 < n <= min(MAX_HEADER, len(blob) - 8) and blob[8:9] == b"{"):
        if blob[:1] == b"\x80" or blob[:2] == b"PK":
            _refuse(f"policy: {p} is a pickle or zip archive, not safetensors; refusing to load it")
        _refuse(f"policy: {p} has no valid safetensors header")
    if hashlib.sha256(blob).hexdigest() != meta["weights"].get("sha256"):
        _refuse(f"policy: {p} does not match the checksum in {META} (changed after export)")
    try:
        tensors = load(blob)
    except (SafetensorError, ValueError, RuntimeError) as e:
        _refuse(f"policy: {p} could not be read as safetensors ({e})")
    if set(tensors) != set(shapes):
        _refuse(f"policy: {p} tensors {sorted(tensors)} do not match the architecture {sorted(shapes)}")
    for name, shape in shapes.items():
        if tuple(tensors[name].shape) != tuple(shape):
            _refuse(f"policy: tensor {name} has shape {tuple(tensors[name].shape)}, architecture needs {tuple(shape)}")
        if not tensors[name].is_floating_point() or not bool(tensors[name].isfinite().all()):
            _refuse(f"policy: tensor {name} must hold finite floating-point numbers")
    return tensors


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


def _check_instance(stored: InstanceSpec, spec: InstanceSpec | None, allow_other_instance: bool) -> InstanceSpec:
    """Matched by content, not by name: an identical instance under another name is accepted."""
    if spec is None:
        return stored
    if (spec.model, spec.state_dim, spec.case_pack) != (stored.model, stored.state_dim, stored.case_pack):
        _refuse(f"policy: trained for {stored.model} with state length {stored.state_dim} and case pack "
                f"{stored.case_pack}, instance has {spec.model}, {spec.state_dim}, {spec.case_pack}")
    diff = instance_differences(stored, spec)
    if diff and not allow_other_instance:
        fs, fi = _flat(stored.to_dict()), _flat(spec.to_dict())
        shown = "; ".join(f"{k} = {fs.get(k, '(unset)')!r} there, {fi.get(k, '(unset)')!r} here" for k in diff[:3])
        more = f" and {len(diff) - 3} more" if len(diff) > 3 else ""
        _refuse(f"policy: trained for another instance: {shown}{more} (apply it anyway with "
                "--allow-other-instance, or allow_other_instance=True in Python)")
    return spec


def load_policy(directory: str | Path, spec: Any = None, *, allow_other_instance: bool = False) -> Any:
    """Load an exported policy; with `spec`, refuse it unless it was trained for that instance."""
    from .learned_policy import LearnedPolicy
    from .network import PolicyNet, check_architecture, tensor_shapes
    from .scaling import Scaling

    if not isinstance(directory, (str, Path)):
        _refuse(f"policy: the folder must be a path, got {type(directory).__name__}")
    if not isinstance(allow_other_instance, bool):
        _refuse(f"allow_other_instance: must be True or False, got {allow_other_instance!r}")
    d = Path(directory)
    if not d.is_dir():
        _refuse(f"policy: {str(d)!r} is not a directory")
    meta = _read_meta(d)
    arch = check_architecture(meta["architecture"])
    try:
        stored = spec_from_dict(meta["instance"])
    except SpecError as e:
        _refuse(f"policy: {META} instance is invalid ({e})")
    scaling = Scaling.from_dict(meta["scaling"])
    if arch["inputs"] != stored.state_dim or arch["outputs"] != scaling.n_actions:
        _refuse(f"policy: architecture {arch['inputs']} -> {arch['outputs']} does not fit state length "
                f"{stored.state_dim} and {scaling.n_actions} order sizes")
    shapes = tensor_shapes(arch)
    if {k: list(v) for k, v in shapes.items()} != meta["weights"].get("tensors"):
        _refuse(f"policy: {META} weights table does not match the architecture")
    tensors = _read_weights(d, meta, shapes)
    from invbench.envs.spec import load_spec
    target = _check_instance(stored, None if spec is None else load_spec(spec), allow_other_instance)
    if scaling.max_order_units > target.order_cap_units:
        _refuse(f"policy: orders up to {scaling.max_order_units} units exceed the instance's cap {target.order_cap_units}")
    net = PolicyNet(arch, init=False)
    net.load_named_tensors(tensors)
    return LearnedPolicy(target, scaling, net, agent=str(meta.get("agent", "")),
                         meta={k: meta.get(k) for k in ("training", "versions", "measured")})
