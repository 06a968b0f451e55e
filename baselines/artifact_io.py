"""Files of a saved policy: `policy.json` plus at most one safetensors file, written atomically
and read back without unpickling. The policy-level meaning (which kind, how to rebuild it) is in
`artifact.py`; this module only writes, checks and reads the bytes.

A policy folder holds `policy.json` (format, kind, instance, the kind's definition, the table of
stored arrays with their SHA-256, a digest over all that) and, when the kind needs arrays, one
safetensors file named in that table. Anything unexpected is refused with a one-line
`PolicyFileError`: a pickle or zip in place of the arrays, a checksum or digest that does not
match, arrays of another name, dtype or shape than recorded.
"""
from __future__ import annotations

import hashlib
import json
import os
import platform
import sys
import tempfile
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from invbench.envs.paths import check_output_dir
from invbench.envs.errors import SpecError

FORMAT = "invbench-policy"
FORMAT_VERSION = 1
META = "policy.json"
#: the array file each kind may use (a fixed name, so policy.json cannot point elsewhere)
ARRAY_FILES = {"learned": "weights.safetensors", "table": "table.safetensors"}
#: top-level keys of policy.json that define a policy of each kind (covered by the digest)
DEFINING = {"learned": ("agent", "scaling", "architecture"), "table": ("table",), "classical": ("policy",)}
MAX_HEADER = 1 << 20  # a safetensors header this large is not one of ours


class PolicyFileError(SpecError):
    """A policy directory is missing, tampered with, or does not fit the instance."""


def refuse(msg: str) -> None:
    raise PolicyFileError(msg)


# ---------------------------------------------------------------------------- writing
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


def atomic_write(path: Path, data: bytes) -> None:
    """Write `data` to `path` through a temp file and os.replace, with the usual umask mode."""
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


def json_default(o: Any) -> Any:
    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, tuple):
        return list(o)
    raise TypeError(f"not JSON-able: {type(o).__name__}")


def write_json_atomic(path: str | Path, obj: Any) -> None:
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    atomic_write(p, (json.dumps(obj, indent=2, sort_keys=True, default=json_default) + "\n").encode())


def versions() -> dict[str, str]:
    """Versions of what made the file; torch and SB3 only when they are already loaded."""
    import gymnasium

    import invbench
    out = {"invbench": invbench.__version__, "python": platform.python_version(), "numpy": np.__version__,
           "gymnasium": gymnasium.__version__}
    for mod in ("torch", "stable_baselines3"):
        if mod in sys.modules:
            out[mod] = getattr(sys.modules[mod], "__version__", "?")
    return out


def digest(meta: Mapping[str, Any]) -> str:
    """Hash of the parts that define the policy, so an edited policy.json is noticed."""
    kind = meta.get("kind")
    keys = ("format", "format_version", "kind", "instance", "arrays") + DEFINING.get(kind, ())
    core = {k: meta.get(k) for k in keys}
    return hashlib.sha256(json.dumps(core, sort_keys=True, default=json_default).encode()).hexdigest()


def arrays_blob(arrays: Mapping[str, Any], header: Mapping[str, str]) -> bytes:
    """safetensors bytes of numpy arrays (or of torch tensors, converted without a copy)."""
    from safetensors.numpy import save
    plain = {k: (v.detach().cpu().numpy() if hasattr(v, "detach") else np.ascontiguousarray(v))
             for k, v in arrays.items()}
    return save(plain, metadata=dict(header))


def check_save_dir(path: str | Path, name: str = "directory", other_files: bool = False) -> Path:
    """A folder a policy may be saved to: new, empty, or holding a saved policy (replaced);
    with `other_files`, any folder (a training run keeps its curve and checkpoints beside it).
    Checked before any work, so a long solve is not lost to a bad path."""
    p = Path(path)
    if p.exists() and not p.is_dir():
        raise SpecError(f"{name}: {p} is an existing file, not a directory")
    if not other_files and p.is_dir() and not (p / META).is_file() and any(p.iterdir()):
        raise SpecError(f"{name}: {p} is a non-empty folder without a saved policy; give a new or empty folder")
    return check_output_dir(p, name)


def write_policy_dir(directory: str | Path, meta: dict[str, Any], arrays: Mapping[str, Any] | None) -> Path:
    """Write one policy folder: the arrays first, policy.json last (a reader that sees the new
    policy.json also sees its arrays; a crash between the two leaves a checksum mismatch, refused)."""
    kind = meta["kind"]
    d = check_save_dir(directory, other_files=True)
    d.mkdir(parents=True, exist_ok=True)
    meta = dict(meta, format=FORMAT, format_version=FORMAT_VERSION)
    if arrays:
        # the safetensors header repeats the kind and its defining parts, for anyone reading it alone
        header = {"format": f"{FORMAT}/{kind}",
                  **{k: json.dumps(meta[k], sort_keys=True, default=json_default)
                     for k in DEFINING[kind] if k in meta and k not in ("agent", "scaling")}}
        blob = arrays_blob(arrays, header)
        name = ARRAY_FILES[kind]
        plain = {k: (v.detach().cpu().numpy() if hasattr(v, "detach") else np.asarray(v)) for k, v in arrays.items()}
        meta["arrays"] = {"file": name, "sha256": hashlib.sha256(blob).hexdigest(),
                          "tensors": {k: {"dtype": str(v.dtype), "shape": list(v.shape)} for k, v in plain.items()}}
        atomic_write(d / name, blob)
    else:
        meta["arrays"] = None
    for other in set(ARRAY_FILES.values()) - ({meta["arrays"]["file"]} if meta["arrays"] else set()):
        if (d / other).is_file():  # a previous policy's arrays in the same folder: not ours any more
            (d / other).unlink()
    meta.setdefault("versions", versions())
    meta["digest"] = digest(meta)
    write_json_atomic(d / META, meta)
    return d


# ---------------------------------------------------------------------------- reading
def read_meta(d: Path) -> dict[str, Any]:
    """policy.json, checked: our format, a known kind, the digest over its defining parts."""
    p = d / META
    if not p.is_file():
        refuse(f"policy: {d} has no {META} (not a saved policy directory)")
    try:
        meta = json.loads(p.read_bytes().decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as e:
        refuse(f"policy: {p} is not valid JSON ({e.__class__.__name__})")
    if not isinstance(meta, dict):
        refuse(f"policy: {p} is not an invbench policy file (format must be {FORMAT!r})")
    if meta.get("format") == "invbench-learned-policy":
        return _upgrade_legacy(p, meta)
    if meta.get("format") != FORMAT:
        refuse(f"policy: {p} is not an invbench policy file (format must be {FORMAT!r})")
    if meta.get("format_version") != FORMAT_VERSION:
        refuse(f"policy: {p} format_version must be {FORMAT_VERSION}, got {meta.get('format_version')!r}")
    kind = meta.get("kind")
    if kind not in DEFINING:
        refuse(f"policy: {p} kind must be one of {', '.join(DEFINING)}, got {kind!r}")
    for key in ("instance", "arrays", "digest") + DEFINING[kind]:
        if key not in meta:
            refuse(f"policy: {p} lacks the {key!r} entry")
    if meta["digest"] != digest(meta):
        refuse(f"policy: {p} was edited after export (digest does not match its contents)")
    if (meta["arrays"] is None) != (kind not in ARRAY_FILES):
        refuse(f"policy: {p} arrays entry does not fit a {kind} policy")
    if meta["arrays"] is not None and meta["arrays"].get("file") != ARRAY_FILES[kind]:
        refuse(f"policy: {p} arrays file must be {ARRAY_FILES[kind]!r} for a {kind} policy")
    return meta


def read_arrays(d: Path, meta: Mapping[str, Any]) -> dict[str, np.ndarray]:
    """The arrays named in meta["arrays"], refused unless bytes, names, dtypes and shapes match."""
    from safetensors import SafetensorError
    from safetensors.numpy import load

    table = meta["arrays"]
    p = d / table["file"]
    if not p.is_file():
        refuse(f"policy: {d} has no {table['file']}")
    blob = p.read_bytes()
    # safetensors: 8-byte little-endian header length, then a JSON header starting with "{".
    # Test that first: a header length such as 0x280 also starts with the pickle byte 0x80.
    n = int.from_bytes(blob[:8], "little") if len(blob) >= 8 else -1
    if not (0 < n <= min(MAX_HEADER, len(blob) - 8) and blob[8:9] == b"{"):
        if blob[:1] == b"\x80" or blob[:2] == b"PK":
            refuse(f"policy: {p} is a pickle or zip archive, not safetensors; refusing to load it")
        refuse(f"policy: {p} has no valid safetensors header")
    if hashlib.sha256(blob).hexdigest() != table.get("sha256"):
        refuse(f"policy: {p} does not match the checksum in {META} (changed after export)")
    try:
        arrays = load(blob)
    except (SafetensorError, ValueError, RuntimeError) as e:
        refuse(f"policy: {p} could not be read as safetensors ({e})")
    expected = table.get("tensors") or {}
    if set(arrays) != set(expected):
        refuse(f"policy: {p} holds arrays {sorted(arrays)}, {META} lists {sorted(expected)}")
    for name, want in expected.items():
        shape = want["shape"] if isinstance(want, Mapping) else want
        if list(arrays[name].shape) != list(shape):
            refuse(f"policy: array {name} has shape {list(arrays[name].shape)}, {META} says {list(shape)}")
        if isinstance(want, Mapping) and str(arrays[name].dtype) != want.get("dtype"):
            refuse(f"policy: array {name} has dtype {arrays[name].dtype}, {META} says {want.get('dtype')}")
    return arrays


def _upgrade_legacy(p: Path, meta: dict[str, Any]) -> dict[str, Any]:
    """A learned policy exported before the common format (format_version 1 of
    "invbench-learned-policy"): checked by its own digest, then read as a learned policy."""
    if meta.get("format_version") != 1:
        refuse(f"policy: {p} format_version must be 1, got {meta.get('format_version')!r}")
    for key in ("instance", "scaling", "architecture", "weights", "digest"):
        if key not in meta:
            refuse(f"policy: {p} lacks the {key!r} entry")
    core = {k: meta[k] for k in ("instance", "scaling", "architecture", "weights")}
    if meta["digest"] != hashlib.sha256(json.dumps(core, sort_keys=True).encode()).hexdigest():
        refuse(f"policy: {p} was edited after export (digest does not match its contents)")
    w = meta["weights"]
    if not isinstance(w, Mapping) or w.get("file") != ARRAY_FILES["learned"]:
        refuse(f"policy: {p} weights file must be {ARRAY_FILES['learned']!r}")
    out = dict(meta, kind="learned", arrays={"file": w["file"], "sha256": w.get("sha256"),
                                              "tensors": dict(w.get("tensors") or {})})
    out.pop("weights")
    return out
