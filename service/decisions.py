"""Orders from saved policies for given states, shared by `invbench decide` and the HTTP service.

States are checked against the model before a policy sees them (length, whole numbers, each
entry within the range the model allows), so a bad state is refused with one line naming the
field, never answered with a silent 0. Orders come back as [B, k] units, one column per order
slot (supplier or stage), and are checked to be legal sizes.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from invbench.baselines.policy import checked_orders
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

#: Largest state entry accepted (units): far above any instance the solver or a network handles,
#: and small enough that sums of a state never overflow int64.
MAX_UNITS = 10**9
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")


class PolicyError(Exception):
    """A policy that was given a valid state failed: the server's fault, not the request's."""


@dataclass
class LoadedPolicy:
    """A saved policy ready to decide: its name (as used by the service), the policy, its instance."""

    name: str
    policy: Any
    spec: InstanceSpec

    def __post_init__(self) -> None:
        # asked on every request: computed once
        slots = self.spec.order_slots
        self.slots = [s.name for s in slots]
        self._sizes = [s.sizes_units for s in slots]
        self.low = np.asarray(self.spec.model_def.state_low(self.spec), dtype=np.float64)
        self.labels = list(self.spec.model_def.state_labels(self.spec))

    def describe(self) -> dict[str, Any]:
        info = self.policy.artifact
        return {"name": self.name, "kind": info.kind, "policy": self.policy.describe(), "digest": info.digest,
                "path": info.path, "instance": info.instance, "state_labels": self.labels,
                "state_min": [None if not math.isfinite(v) else int(v) for v in self.low],
                "order_slots": self.slots}

    def decide(self, states: np.ndarray) -> np.ndarray:
        """Orders [B, k] in units for checked states [B, n]; SpecError for a state the policy
        does not cover (e.g. off a saved table), PolicyError when the policy itself misbehaves."""
        try:
            raw = self.policy.act(states)
        except SpecError:
            raise
        except Exception as e:  # a policy bug must not look like a bad request
            raise PolicyError(f"policy {self.name}: failed on a valid state ({e.__class__.__name__}: {e})") from None
        arr = np.asarray(raw)
        k = len(self._sizes)
        if arr.dtype.kind in "iu" and arr.size == len(states) * k:  # the usual case, checked quickly
            arr = arr.reshape(len(states), k).astype(np.int64, copy=False)
            legal = True
            for j, sizes in enumerate(self._sizes):
                pos = np.minimum(np.searchsorted(sizes, arr[:, j]), len(sizes) - 1)
                legal = legal and bool(np.all(sizes[pos] == arr[:, j]))
            if legal:
                return arr
        try:  # the full check, which says what is wrong
            orders, _ = checked_orders(self.spec, raw, states)
        except SpecError as e:
            raise PolicyError(f"policy {self.name}: {e}") from None
        return orders


def load_policies(items: Sequence[str], field: str = "DIR") -> dict[str, LoadedPolicy]:
    """`DIR` or `NAME=DIR` items -> name -> LoadedPolicy (name defaults to the folder's name)."""
    from invbench.baselines.artifact import load_policy
    out: dict[str, LoadedPolicy] = {}
    for item in items:
        name, sep, path = item.partition("=")
        if not sep:
            name, path = Path(item.rstrip("/")).name, item
        if not _NAME.match(name):
            raise SpecError(f"{field}: policy name {name!r} must be 1-64 letters, digits, '_', '.' or '-' "
                            "(give NAME=DIR to choose one)")
        if name in out:
            raise SpecError(f"{field}: two policies are named {name!r} (give NAME=DIR to tell them apart)")
        pol = load_policy(path)
        out[name] = LoadedPolicy(name, pol, pol.spec)
    return out


def check_state(values: Any, lp: LoadedPolicy, field: str = "state") -> list[int]:
    """One state from JSON or the command line as whole units, or SpecError naming the entry."""
    n = lp.spec.state_dim
    if not isinstance(values, (list, tuple)) or len(values) != n:
        got = f"{len(values)} entries" if isinstance(values, (list, tuple)) else repr(values)[:40]
        raise SpecError(f"{field}: must be a list of {n} whole numbers ({_labels(lp)}), got {got}")
    out = []
    low = lp.low
    for i, v in enumerate(values):
        lo = low[i]
        rng = f"[{int(lo)}, {MAX_UNITS}]" if math.isfinite(lo) else f"[-{MAX_UNITS}, {MAX_UNITS}]"
        ok = not isinstance(v, bool) and isinstance(v, (int, float))
        if ok and isinstance(v, float):
            ok = math.isfinite(v) and v.is_integer()
        if not ok or not (max(lo, -MAX_UNITS) <= v <= MAX_UNITS):
            raise SpecError(f"{field}[{i}]: must be a whole number of units in {rng} "
                            f"({lp.labels[i]}), got {v!r}")
        out.append(int(v))
    return out


def parse_state_text(text: str, lp: LoadedPolicy, field: str = "--state") -> list[int]:
    """`4,6` -> [4, 6], checked like a JSON state."""
    parts = [p.strip() for p in text.split(",")]
    vals: list[Any] = []
    for p in parts:
        try:
            vals.append(int(p))
        except ValueError:
            try:
                vals.append(float(p))
            except ValueError:
                vals.append(p)
    return check_state(vals, lp, field)


def check_state_array(x: np.ndarray, lp: LoadedPolicy, where: Any, raw: Any = None) -> np.ndarray:
    """A float array [B, n] (e.g. read from CSV, NaN for missing) -> int64, or SpecError naming
    the first bad row and column via `where(row, col)` (and its text `raw[row, col]`, if given)."""
    low = np.maximum(lp.low, -MAX_UNITS)
    bad = ~np.isfinite(x) | (x != np.rint(np.nan_to_num(x))) | (x < low) | (x > MAX_UNITS)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        rng = f"[{int(low[c])}, {MAX_UNITS}]"
        got = raw[r, c] if raw is not None else x[r, c].item()
        raise SpecError(f"{where(r, c)}: must be a whole number of units in {rng}, got {got!r}")
    return x.astype(np.int64)


def first_refused(lp: LoadedPolicy, states: np.ndarray) -> tuple[int, SpecError]:
    """Row of the first state a policy refuses, by halving (a batch raises on one bad row)."""
    lo, hi = 0, len(states)
    err: SpecError | None = None
    while hi - lo > 1:
        mid = (lo + hi) // 2
        try:
            lp.decide(states[lo:mid])
            lo = mid
        except SpecError as e:
            hi, err = mid, e
    if err is None or hi - lo == 1:
        try:
            lp.decide(states[lo:lo + 1])
        except SpecError as e:
            err = e
    assert err is not None
    return lo, err


def decide_rows(lp: LoadedPolicy, states: np.ndarray, row_name: Any) -> np.ndarray:
    """Orders for many checked states; a refused state is named by `row_name(row)`."""
    try:
        return lp.decide(states)
    except SpecError:
        row, err = first_refused(lp, states)
        raise SpecError(f"{row_name(row)}: {_strip_field(str(err))}") from None


def order_payload(orders_row: np.ndarray, slots: Sequence[str]) -> dict[str, Any]:
    """JSON answer for one state: `order` is the units (a list of k for k order slots)."""
    vals = [int(v) for v in orders_row]
    return {"order": vals[0] if len(vals) == 1 else vals, "orders": dict(zip(slots, vals)), "units": sum(vals)}


def _labels(lp: LoadedPolicy) -> str:
    return "; ".join(lp.labels)


def _strip_field(msg: str) -> str:
    return msg[len("state: "):] if msg.startswith("state: ") else msg
