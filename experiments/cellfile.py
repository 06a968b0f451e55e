"""The file format of one finished cell: its record as JSON with a sha256 digest inside.

A results folder lives for weeks and gets copied, synced and sometimes edited by hand, so a
cell file proves its own integrity: `decode_cell` refuses a file that is not UTF-8, not JSON,
lacks a key, holds a value of the wrong type or was changed after it was written.
"""
from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path
from typing import Any

#: Name of the field that holds the digest of the rest of the record.
DIGEST_KEY = "digest"
STATUSES = ("ok", "failed")


class DamagedCell(ValueError):
    """A cell file that cannot be trusted; the message says why, in a few words."""


def canonical(record: dict[str, Any]) -> str:
    """The text the digest is taken over: sorted keys, no spaces, ASCII only."""
    return json.dumps(record, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def digest(record: dict[str, Any]) -> str:
    body = {k: v for k, v in record.items() if k != DIGEST_KEY}
    return "sha256:" + hashlib.sha256(canonical(body).encode("ascii")).hexdigest()


def encode_cell(record: dict[str, Any]) -> str:
    """The file content of a JSON-ready record (see store.to_jsonable), digest included."""
    body = {k: v for k, v in record.items() if k != DIGEST_KEY}
    check_record(body, body.get("cell_id"))
    return json.dumps({**body, DIGEST_KEY: digest(body)}, indent=1, sort_keys=True, allow_nan=False)


def decode_cell(path: Path) -> dict[str, Any]:
    """The record in `path` (without its digest); DamagedCell when it cannot be trusted."""
    try:
        raw = Path(path).read_bytes()
    except OSError as e:
        raise DamagedCell(f"cannot be read ({e.strerror or e})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        raise DamagedCell(f"not UTF-8 text (byte 0x{raw[e.start]:02x} at offset {e.start})") from None
    try:
        rec = json.loads(text, parse_constant=_no_constant)
    except (json.JSONDecodeError, ValueError) as e:
        raise DamagedCell(f"not valid JSON ({str(e).splitlines()[0]})") from None
    if not isinstance(rec, dict):
        raise DamagedCell(f"not a JSON object (a {type(rec).__name__})")
    stored = rec.pop(DIGEST_KEY, None)
    if not isinstance(stored, str):
        raise DamagedCell("no digest (written by an older invbench, or cut short)")
    check_record(rec, Path(path).stem)
    if stored != digest(rec):
        raise DamagedCell("digest mismatch (changed after it was written)")
    return rec


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not allowed")


def check_record(rec: dict[str, Any], cell_id: Any) -> None:
    """The keys every record has, with their types; a finished cell also has a finite cost."""
    def need(key: str, ok: Any, what: str) -> None:
        if key not in rec:
            raise DamagedCell(f"key {key!r} missing")
        if not ok(rec[key]):
            raise DamagedCell(f"key {key!r} must be {what}, got {_short(rec[key])}")

    need("cell_id", lambda v: isinstance(v, str) and v == cell_id, f"the file's name {cell_id!r}")
    need("status", lambda v: v in STATUSES, "one of " + ", ".join(STATUSES))
    for key in ("suite", "instance", "policy", "kind"):
        need(key, lambda v: isinstance(v, str), "a string")
    need("seed", lambda v: isinstance(v, int) and not isinstance(v, bool) and v >= 0, "an integer >= 0")
    if rec["status"] == "ok":
        need("cost", _finite, "a finite number")
        need("method", lambda v: v is None or isinstance(v, str), "a string")
        need("params", lambda v: isinstance(v, dict), "a table")
        if rec.get("ci_halfwidth") is not None and not (_finite(rec["ci_halfwidth"]) and rec["ci_halfwidth"] >= 0):
            raise DamagedCell(f"key 'ci_halfwidth' must be a finite number >= 0, got {_short(rec['ci_halfwidth'])}")
    else:
        need("error", lambda v: isinstance(v, str), "a string")


def _finite(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _short(v: Any) -> str:
    txt = repr(v)
    return txt if len(txt) <= 40 else txt[:37] + "..."
