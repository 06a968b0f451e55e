"""The instance spec: one validated, frozen description of an inventory problem.

Loaded from a TOML file or a dict (the `[instance]` table), written back to TOML. Every
consumer (env, solver, simulator, policies) reads its parameters from here.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np
import tomli_w

from .demand import Demand
from .errors import SpecError

MODELS = ("lost_sales", "backorder")
#: Tables a spec file may hold; only [instance] is read here, the others by their own parts.
TOP_LEVEL_TABLES = ("instance", "agent")

# key -> (type, lower bound, lower open?, upper bound, description)
_FIELDS: dict[str, tuple[type, float | None, bool, float | None, str]] = {
    "lead_time": (int, 0, False, 50, "periods between ordering and arrival"),
    "holding_cost": (float, 0.0, False, None, "per unit of end-of-period stock"),
    "shortage_cost": (float, 0.0, False, None, "per unit lost / backordered per period"),
    "unit_order_cost": (float, 0.0, False, None, "per unit ordered"),
    "fixed_order_cost": (float, 0.0, False, None, "per period with a positive order"),
    "max_order": (int, 0, True, 100000, "largest order in units"),
    "case_pack": (int, 1, False, 100000, "legal orders are multiples of this many units"),
    "discount": (float, 0.0, True, 1.0, "1.0 = long-run average cost, < 1 = discounted"),
}


@dataclass(frozen=True)
class InstanceSpec:
    """A periodic-review single-item inventory instance. Orders are in units."""

    model: str
    demand: Demand
    lead_time: int = 0
    holding_cost: float = 1.0
    shortage_cost: float = 9.0
    unit_order_cost: float = 0.0
    fixed_order_cost: float = 0.0
    max_order: int | None = None
    case_pack: int = 1
    discount: float = 1.0
    name: str = ""
    _max_order_units: int = field(init=False, repr=False, compare=False, default=0)

    def __post_init__(self) -> None:
        if self.model not in MODELS:
            raise SpecError(f"instance.model: must be one of {', '.join(MODELS)}, got {self.model!r}")
        if not isinstance(self.demand, Demand):
            raise SpecError("instance.demand: must be a demand table")
        for key, (typ, lo, lo_open, hi, _) in _FIELDS.items():
            v = getattr(self, key)
            if key == "max_order" and v is None:
                continue
            object.__setattr__(self, key, _check(f"instance.{key}", v, typ, lo, lo_open, hi))
        if not isinstance(self.name, str):
            raise SpecError(f"instance.name: must be a string, got {self.name!r}")
        cap = self.max_order if self.max_order is not None else default_max_order(self.demand, self.lead_time)
        cap_units = (cap // self.case_pack) * self.case_pack
        if cap_units < self.case_pack:
            raise SpecError(
                f"instance.max_order: must be >= case_pack ({self.case_pack}), got {cap}")
        object.__setattr__(self, "_max_order_units", int(cap_units))
        if self.model == "lost_sales" and self.shortage_cost <= 0 and self.holding_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 when holding_cost is 0")

    # ------------------------------------------------------------------ derived facts
    @property
    def order_cap_units(self) -> int:
        """Largest legal order in units: max_order (or its default) rounded down to a case-pack multiple."""
        return self._max_order_units

    @property
    def order_sizes_units(self) -> np.ndarray:
        """All legal order sizes in units: 0, q, 2q, ... up to the cap."""
        return np.arange(0, self.order_cap_units + 1, self.case_pack, dtype=np.int64)

    @property
    def state_dim(self) -> int:
        """Length of the state vector: on-hand/net inventory plus the L - 1 orders still in transit."""
        return max(self.lead_time, 1)

    @property
    def label(self) -> str:
        if self.name:
            return self.name
        return (f"{self.model}-L{self.lead_time}-p{self.shortage_cost:g}-{self.demand.describe()}")

    def with_(self, **changes: Any) -> "InstanceSpec":
        """A copy with some fields changed (validated again)."""
        return replace(self, **changes)

    # ------------------------------------------------------------------ (de)serialisation
    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {}
        if self.name:
            d["name"] = self.name
        d["model"] = self.model
        for key in _FIELDS:
            v = getattr(self, key)
            if v is not None:
                d[key] = v
        d["demand"] = self.demand.to_dict()
        return d

    def to_toml(self) -> str:
        return tomli_w.dumps({"instance": self.to_dict()})

    def save(self, path: str | Path) -> None:
        Path(path).write_text(self.to_toml())


def default_max_order(demand: Demand, lead_time: int) -> int:
    """Default order cap when none is given: twice the largest one-period demand in the pmf.

    Why: in steady state an order replaces what was sold, so it rarely exceeds one period's
    demand; the factor 2 leaves room for catching up from an empty start. The exact solver
    widens its own bounds when they bind; a user who wants an uncapped model sets max_order.
    """
    return max(2 * demand.pmf().support_max, 1)


def _check(name: str, v: Any, typ: type, lo: float | None, lo_open: bool, hi: float | None) -> Any:
    if isinstance(v, bool):
        raise SpecError(f"{name}: must be {'an integer' if typ is int else 'a number'}, got {v!r}")
    if typ is int:
        if isinstance(v, (float, np.floating)) and float(v).is_integer():
            v = int(v)
        if not isinstance(v, (int, np.integer)):
            raise SpecError(f"{name}: must be an integer, got {v!r}")
        v = int(v)
    else:
        if not isinstance(v, (int, float, np.integer, np.floating)):
            raise SpecError(f"{name}: must be a number, got {v!r}")
        v = float(v)
        if not math.isfinite(v):
            raise SpecError(f"{name}: must be finite, got {v}")
    ok_lo = lo is None or (v > lo if lo_open else v >= lo)
    ok_hi = hi is None or v <= hi
    if not (ok_lo and ok_hi):
        if lo is not None and hi is not None:
            rng = f"in {'(' if lo_open else '['}{lo:g}, {hi:g}]"
        elif lo is not None:
            rng = f"{'>' if lo_open else '>='} {lo:g}"
        else:
            rng = f"<= {hi:g}"
        raise SpecError(f"{name}: must be {rng}, got {v:g}")
    return v


def spec_from_dict(d: Mapping[str, Any]) -> InstanceSpec:
    """Build a spec from a dict: either the `[instance]` table itself or a dict holding it."""
    if not isinstance(d, Mapping):
        raise SpecError("instance: must be a table")
    if "instance" in d:
        extra = [k for k in d if k not in TOP_LEVEL_TABLES]
        if extra:
            raise SpecError(
                f"{extra[0]}: unknown top-level table (allowed: {', '.join(TOP_LEVEL_TABLES)})")
        d = d["instance"]
        if not isinstance(d, Mapping):
            raise SpecError("instance: must be a table")
    d = dict(d)
    allowed = {"name", "model", "demand", *_FIELDS}
    for k in d:
        if k not in allowed:
            raise SpecError(f"instance.{k}: unknown key (allowed: {', '.join(sorted(allowed))})")
    if "model" not in d:
        raise SpecError(f"instance.model: required, one of {', '.join(MODELS)}")
    if "demand" not in d:
        raise SpecError("instance.demand: required table, e.g. {distribution = \"poisson\", mean = 5}")
    demand = d.pop("demand")
    if isinstance(demand, Demand):
        dem = demand
    else:
        dem = Demand.from_dict(demand)
    return InstanceSpec(demand=dem, **d)


def load_spec(source: str | Path | Mapping[str, Any] | InstanceSpec) -> InstanceSpec:
    """Load an instance from a TOML path, a TOML string path-like, a dict, or pass a spec through."""
    if isinstance(source, InstanceSpec):
        return source
    if isinstance(source, Mapping):
        return spec_from_dict(source)
    path = Path(source)
    if not path.is_file():
        raise SpecError(f"spec file: {str(path)!r} does not exist or is not a file")
    try:
        data = tomllib.loads(path.read_text())
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"spec file: {path} is not valid TOML ({e})") from None
    if "instance" not in data:
        raise SpecError(f"instance: {path} has no [instance] table")
    return spec_from_dict(data)
