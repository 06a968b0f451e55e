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
from .lead_time import LeadTimePmf, parse_lead_time
from .models import MODELS, Field, InventoryModel, OrderSlot, get_model

#: Tables a spec file may hold; only [instance] is read here, the others by their own parts.
TOP_LEVEL_TABLES = ("instance", "agent")
#: Costs above this are refused: sums of a few thousand such terms must stay finite and exact
#: enough in float64 (common practice: rescale money units instead).
COST_LIMIT = 1e12

#: Keys every single-item model shares; a model declares its own in its folder.
COMMON_FIELDS: dict[str, Field] = {
    # lost_sales and backorder also take a table { pmf = [...] } (envs/lead_time.py)
    "lead_time": Field(int, 0, "periods between ordering and arrival", 0, 50),
    "holding_cost": Field(float, 1.0, "per unit of end-of-period stock", 0.0, COST_LIMIT),
    "shortage_cost": Field(float, 9.0, "per unit lost / backordered per period", 0.0, COST_LIMIT),
    "unit_order_cost": Field(float, 0.0, "per unit ordered", 0.0, COST_LIMIT),
    "fixed_order_cost": Field(float, 0.0, "per period with a positive order", 0.0, COST_LIMIT),
    "max_order": Field(int, None, "largest order in units", 0, 100000, lo_open=True, optional=True),
    "case_pack": Field(int, 1, "legal orders are multiples of this many units", 1, 100000),
    "discount": Field(float, 1.0, "1.0 = long-run average cost, < 1 = discounted", 0.0, 1.0, lo_open=True),
}


@dataclass(frozen=True)
class InstanceSpec:
    """A periodic-review inventory instance. Orders are in units.

    The common keys are fields; a model's own keys (e.g. `shelf_life`) live in `extra` and read
    as attributes too (`spec.shelf_life`). Build from a dict with `spec_from_dict`.
    """

    model: str
    demand: Demand
    lead_time: int | LeadTimePmf = 0  # a LeadTimePmf when random (lost_sales, backorder)
    holding_cost: float = 1.0
    shortage_cost: float = 9.0
    unit_order_cost: float = 0.0
    fixed_order_cost: float = 0.0
    max_order: int | None = None
    case_pack: int = 1
    discount: float = 1.0
    name: str = ""
    extra: Any = ()
    _max_order_units: int = field(init=False, repr=False, compare=False, default=0)

    def __post_init__(self) -> None:
        model = get_model(self.model)
        if not isinstance(self.demand, Demand):
            raise SpecError("instance.demand: must be a demand table")
        for key, f in COMMON_FIELDS.items():
            v = getattr(self, key)
            if key in model.unused_common:
                if v != f.default:
                    raise SpecError(f"instance.{key}: not used by the {model.name} model (leave it out)")
                continue
            if key == "lead_time" and isinstance(v, (Mapping, LeadTimePmf)):
                object.__setattr__(self, key, parse_lead_time(v, model.name, model.random_lead_time))
                continue
            if key == "lead_time" and model.random_lead_time:
                try:
                    check_field("instance.lead_time", v, f)
                except SpecError as e:  # say that a table is allowed too
                    fixed = f.range_text()
                    raise SpecError(str(e).replace(f"must be {fixed}", f"must be {fixed} or a table "
                                                   "{ pmf = [p0, p1, ...] } (random lead time)", 1)) from None
            object.__setattr__(self, key, check_field(f"instance.{key}", v, f))
        extra = dict(self.extra) if not isinstance(self.extra, tuple) else dict(self.extra)
        for k in extra:
            if k not in model.fields:
                allowed = sorted({"name", "model", "demand", *COMMON_FIELDS, *model.fields} - set(model.unused_common))
                raise SpecError(f"instance.{k}: unknown key for the {model.name} model (allowed: {', '.join(allowed)})")
        checked = {k: check_field(f"instance.{k}", extra.get(k, f.default), f) for k, f in model.fields.items()}
        object.__setattr__(self, "extra", tuple(sorted(checked.items())))
        if not isinstance(self.name, str):
            raise SpecError(f"instance.name: must be a string, got {self.name!r}")
        cap = self.max_order if self.max_order is not None else default_max_order(self.demand, self.lead_time)
        cap_units = (cap // self.case_pack) * self.case_pack
        if cap_units < self.case_pack:
            raise SpecError(
                f"instance.max_order: must be >= case_pack ({self.case_pack}), got {cap}")
        object.__setattr__(self, "_max_order_units", int(cap_units))
        model.check(self)

    def __getattr__(self, key: str) -> Any:
        # only called when normal lookup fails: the model's own keys
        if key.startswith("_") or key == "extra":
            raise AttributeError(key)
        for k, v in object.__getattribute__(self, "extra"):
            if k == key:
                return v
        raise AttributeError(f"instance has no key {key!r}")

    @property
    def model_def(self) -> InventoryModel:
        """The model object (its step function, layout and exact space)."""
        return get_model(self.model)

    # ------------------------------------------------------------------ derived facts
    @property
    def order_cap_units(self) -> int:
        """Largest legal order in units: max_order (or its default) rounded down to a case-pack multiple."""
        return self._max_order_units

    @property
    def order_slots(self) -> list[OrderSlot]:
        """The order quantities placed each period, with their legal sizes in units."""
        return self.model_def.order_slots(self)

    @property
    def order_sizes_units(self) -> np.ndarray:
        """Legal sizes of the first (for most models the only) order: 0, q, 2q, ... up to the cap."""
        return self.order_slots[0].sizes_units

    @property
    def lead_time_law(self) -> LeadTimePmf | None:
        """The lead-time pmf when the lead time is random, None when it is fixed."""
        return self.lead_time if isinstance(self.lead_time, LeadTimePmf) else None

    @property
    def longest_lead_time(self) -> int:
        """The fixed lead time, or the longest one a random lead time can take (the state layout)."""
        law = self.lead_time_law
        return self.lead_time if law is None else law.longest  # type: ignore[return-value]

    @property
    def mean_lead_time(self) -> float:
        law = self.lead_time_law
        return float(self.lead_time) if law is None else law.mean  # type: ignore[arg-type]

    @property
    def lead_time_text(self) -> str:
        """The lead time for people: "2", or a random one's pmf such as "pmf(0.2,0.5,0.3)"."""
        law = self.lead_time_law
        return str(self.lead_time) if law is None else law.describe()

    @property
    def lead_time_kind(self) -> str:
        """"fixed", "in_sequence" (random, orders never cross) or "crossing" (drawn per order)."""
        law = self.lead_time_law
        return "fixed" if law is None else ("crossing" if law.crossing else "in_sequence")

    @property
    def state_dim(self) -> int:
        """Length of the state vector (the model's layout)."""
        return self.model_def.state_dim(self)

    @property
    def label(self) -> str:
        if self.name:
            return self.name
        return (f"{self.model}-L{self.model_def.lead_time_text(self)}-p{self.shortage_cost:g}-"
                f"{self.demand.describe()}")

    def with_(self, **changes: Any) -> "InstanceSpec":
        """A copy with some fields changed (validated again); a model's own keys too."""
        extra = dict(self.extra)
        model = get_model(changes.get("model", self.model))
        for k in list(changes):
            if k not in COMMON_FIELDS and k not in ("model", "demand", "name", "extra"):
                extra[k] = changes.pop(k)
        extra = {k: v for k, v in extra.items() if k in model.fields}
        return replace(self, extra=tuple(extra.items()), **changes)

    def content_key(self) -> dict[str, Any]:
        """The instance without its name: two specs with equal keys are the same problem."""
        d = self.to_dict()
        d.pop("name", None)
        return d

    # ------------------------------------------------------------------ (de)serialisation
    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {}
        if self.name:
            d["name"] = self.name
        d["model"] = self.model
        unused = self.model_def.unused_common
        for key in COMMON_FIELDS:
            v = getattr(self, key)
            if v is not None and key not in unused:
                d[key] = v.to_dict() if isinstance(v, LeadTimePmf) else v
        # list-valued keys are kept as tuples (the spec is frozen) and written as lists
        d.update({k: list(v) if isinstance(v, tuple) else v for k, v in self.extra if v is not None})
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


def check_field(name: str, v: Any, f: Field) -> Any:
    """The value of one key, converted to the field's type, or SpecError naming the key and range."""
    if f.optional and v is None:
        return None
    if f.length is not None:
        lo, hi = f.length
        if isinstance(v, (str, bytes)) or not isinstance(v, (list, tuple, np.ndarray)) or not lo <= len(v) <= hi:
            raise SpecError(f"{name}: must be {f.range_text()}, got {v!r}")
        item = f.item()
        return tuple(check_field(f"{name}[{i}]", x, item) for i, x in enumerate(v))
    if f.choices:
        if not isinstance(v, str) or v not in f.choices:
            raise SpecError(f"{name}: must be {f.range_text()}, got {v!r}")
        return v
    if isinstance(v, (bool, np.bool_)):
        raise SpecError(f"{name}: must be {f.range_text()}, got {v!r}")
    if f.type is int:
        if isinstance(v, (float, np.floating)) and math.isfinite(v) and float(v).is_integer():
            v = int(v)
        if not isinstance(v, (int, np.integer)):
            raise SpecError(f"{name}: must be {f.range_text()}, got {v!r}")
        v = int(v)
    else:
        if not isinstance(v, (int, float, np.integer, np.floating)):
            raise SpecError(f"{name}: must be {f.range_text()}, got {v!r}")
        v = float(v)
        if not math.isfinite(v):
            raise SpecError(f"{name}: must be {f.range_text()} (finite), got {v}")
    ok_lo = f.lo is None or (v > f.lo if f.lo_open else v >= f.lo)
    ok_hi = f.hi is None or v <= f.hi
    if not (ok_lo and ok_hi):
        raise SpecError(f"{name}: must be {f.range_text()}, got {v:g}")
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
    if "model" not in d:
        raise SpecError(f"instance.model: required, one of {', '.join(MODELS)}")
    model = get_model(d["model"])
    allowed = {"name", "model", "demand", *COMMON_FIELDS, *model.fields} - set(model.unused_common)
    for k in d:
        if not isinstance(k, str) or k not in allowed:
            raise SpecError(f"instance.{k}: unknown key for the {model.name} model "
                            f"(allowed: {', '.join(sorted(allowed))})")
    if "demand" not in d:
        raise SpecError("instance.demand: required table, e.g. {distribution = \"poisson\", mean = 5}")
    demand = d.pop("demand")
    if isinstance(demand, Demand):
        dem = demand
    else:
        dem = Demand.from_dict(demand)
    extra = {k: d.pop(k) for k in list(d) if k in model.fields}
    return InstanceSpec(demand=dem, extra=tuple(extra.items()), **d)


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
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as e:
        raise SpecError(f"spec file: {path} is not UTF-8 text (byte 0x{e.object[e.start]:02x} at offset "
                        f"{e.start}); save it as UTF-8") from None
    except OSError as e:
        raise SpecError(f"spec file: {path} cannot be read ({e.strerror or e})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"spec file: {path} is not valid TOML ({e})") from None
    if "instance" not in data:
        raise SpecError(f"instance: {path} has no [instance] table")
    return spec_from_dict(data)
