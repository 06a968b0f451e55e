"""Instance-derived scaling shared by training and the exported policy.

Networks see `state / obs_scale - 1` (mean demand as the unit, so one setting fits instances of
any size), rewards are `-(cost - reward_offset) / reward_scale` (a reference cost as offset and
unit keeps value targets near zero), and actions index the order sizes 0, q, 2q, ... up to an
order bound taken from a high demand quantile (orders beyond it are never needed in steady state),
and orders never lift the inventory position above a cap derived from the instance. DQN's orders
also never leave the position below a floor where unmet demand is backordered (`position_floor_for`).

Models that place several orders per period (one per supplier or stage) get one head per order
slot: slot j's actions index its own legal sizes up to the same demand quantile (see
`slot_bounds`), and there is no position cap (its meaning differs per model).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Mapping

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import critical_ratio
from invbench.envs.spec import InstanceSpec

from invbench.experiments.simulate import simulate
from .settings import AUTO, CommonSettings


@dataclass(frozen=True)
class Scaling:
    """How raw states, costs and action indices map to what the network sees and emits."""

    obs_scale: float
    obs_shift: float
    reward_offset: float
    reward_scale: float
    case_pack: int
    max_order_units: int
    obs_clip: float = 0.0  # features clipped to [-obs_clip, obs_clip]; 0 = no clipping
    position_cap: int = 0  # orders never lift the inventory position above this; 0 = no cap
    position_floor: int | None = None  # orders never leave the inventory position below this; None = no floor
    #: legal sizes (units) of each order slot the network has a head for; empty = one slot of
    #: 0, q, ..., max_order_units (what files written before several slots existed mean)
    slot_sizes: tuple[tuple[int, ...], ...] = ()

    def __post_init__(self) -> None:
        if not self.slot_sizes:
            one = tuple(range(0, self.max_order_units + 1, max(self.case_pack, 1)))
            object.__setattr__(self, "slot_sizes", (one,))
        else:
            object.__setattr__(self, "slot_sizes", tuple(tuple(int(u) for u in s) for s in self.slot_sizes))

    @property
    def n_slots(self) -> int:
        return len(self.slot_sizes)

    @property
    def slot_counts(self) -> list[int]:
        """Number of actions (network outputs) of each slot's head."""
        return [len(s) for s in self.slot_sizes]

    @property
    def n_outputs(self) -> int:
        return sum(self.slot_counts)

    @property
    def n_actions(self) -> int:
        return len(self.slot_sizes[0])

    @property
    def order_sizes_units(self) -> np.ndarray:
        return np.asarray(self.slot_sizes[0], dtype=np.int64)

    def slot_units(self, j: int) -> np.ndarray:
        return np.asarray(self.slot_sizes[j], dtype=np.int64)

    def features(self, obs: np.ndarray) -> np.ndarray:
        x = np.asarray(obs, dtype=np.float32) / np.float32(self.obs_scale) - np.float32(self.obs_shift)
        if self.obs_clip > 0:
            x = np.clip(x, -self.obs_clip, self.obs_clip)
        return x.astype(np.float32)

    def orders(self, states: np.ndarray, index: np.ndarray) -> np.ndarray:
        """Units ordered for action indices in raw states, after the position cap (if any).

        One slot: index [B] -> units [B]; k slots: index [B, k] -> units [B, k].
        """
        if self.n_slots > 1:
            idx = np.asarray(index, dtype=np.int64).reshape(-1, self.n_slots)
            return np.column_stack([self.slot_units(j)[idx[:, j]] for j in range(self.n_slots)])
        units = self.order_sizes_units[np.asarray(index, dtype=np.int64)]
        if self.position_cap > 0:
            room = np.maximum(self.position_cap - np.asarray(states).sum(axis=1).astype(np.int64), 0)
            units = np.minimum(units, (room // self.case_pack) * self.case_pack)
        if self.position_floor is not None:
            need = self.position_floor - np.asarray(states).sum(axis=1).astype(np.int64)
            lift = -(-need // self.case_pack) * self.case_pack  # the floor in whole case packs
            units = np.minimum(np.maximum(units, lift), self.max_order_units)
        return units

    def reward(self, cost: np.ndarray) -> np.ndarray:
        return -(np.asarray(cost, dtype=np.float64) - self.reward_offset) / self.reward_scale

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["slot_sizes"] = [list(s) for s in self.slot_sizes]
        return d

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "Scaling":
        want = {"obs_scale", "obs_shift", "reward_offset", "reward_scale", "case_pack", "max_order_units", "obs_clip",
                "position_cap"}
        # optional: files from before several order slots have one slot implied, files from
        # before the floor have none
        if not isinstance(d, Mapping) or set(d) - {"slot_sizes", "position_floor"} != want:
            raise SpecError(f"policy.json scaling: must have exactly the keys {', '.join(sorted(want))} "
                            "(and optionally slot_sizes, position_floor)")
        slots = _read_slot_sizes(d.get("slot_sizes"))
        floor = d.get("position_floor")
        if floor is not None and (isinstance(floor, bool) or not isinstance(floor, int)):
            raise SpecError("policy.json scaling.position_floor: must be an integer or null")
        try:
            out = cls(obs_scale=float(d["obs_scale"]), obs_shift=float(d["obs_shift"]),
                      reward_offset=float(d["reward_offset"]), reward_scale=float(d["reward_scale"]),
                      case_pack=int(d["case_pack"]), max_order_units=int(d["max_order_units"]),
                      obs_clip=float(d["obs_clip"]), position_cap=int(d["position_cap"]), slot_sizes=slots,
                      position_floor=floor)
        except (TypeError, ValueError):
            raise SpecError("policy.json scaling: values must be numbers") from None
        if not (np.isfinite(out.obs_scale) and out.obs_scale > 0 and out.case_pack >= 1 and out.obs_clip >= 0 and out.position_cap >= 0
                and out.max_order_units >= out.case_pack and out.max_order_units % out.case_pack == 0):
            raise SpecError("policy.json scaling: obs_scale must be > 0 and max_order_units a positive case-pack multiple")
        if out.n_slots == 1 and out.slot_sizes[0] != tuple(range(0, out.max_order_units + 1, out.case_pack)):
            raise SpecError("policy.json scaling.slot_sizes: one slot must hold 0, case_pack, ..., max_order_units")
        if out.position_floor is not None and out.position_cap > 0 and out.position_floor >= out.position_cap:
            raise SpecError("policy.json scaling.position_floor: must be below position_cap")
        if out.n_slots > 1 and (out.position_cap != 0 or out.position_floor is not None or out.max_order_units != max(s[-1] for s in out.slot_sizes)):
            raise SpecError("policy.json scaling: with several slots position_cap must be 0, position_floor null and "
                            "max_order_units the largest size of any slot")
        return out


def _read_slot_sizes(raw: Any) -> tuple[tuple[int, ...], ...]:
    """slot_sizes from a file: lists of ascending non-negative integers starting at 0."""
    if raw is None:
        return ()
    bad = SpecError("policy.json scaling.slot_sizes: must be 1 to 64 lists, each of ascending integers >= 0 "
                    "starting at 0")
    if not isinstance(raw, list) or not 1 <= len(raw) <= 64:
        raise bad
    out = []
    for sizes in raw:
        if (not isinstance(sizes, list) or not sizes or sizes[0] != 0
                or not all(isinstance(u, int) and not isinstance(u, bool) for u in sizes)
                or any(b <= a for a, b in zip(sizes, sizes[1:]))):
            raise bad
        out.append(tuple(sizes))
    return tuple(out)


def demand_quantile(spec: InstanceSpec, q: float, periods: int = 1) -> int:
    """Smallest k with P(demand over `periods` periods <= k) >= q, from the exact pmf."""
    cdf = np.cumsum(spec.demand.lead_time_pmf(periods).normalized())
    return int(min(np.searchsorted(cdf, q, side="left"), len(cdf) - 1))


def order_bound(spec: InstanceSpec, settings: CommonSettings) -> int:
    """The agent's largest order in units: set, or the demand quantile rounded up to a case pack."""
    q = spec.case_pack
    if settings.max_order_units != AUTO:
        units = int(settings.max_order_units)
        if units % q:
            raise SpecError(f"agent.max_order_units: must be a multiple of the case pack {q}, got {units}")
        if units > spec.order_cap_units:
            raise SpecError(f"agent.max_order_units: must be <= the instance's order cap {spec.order_cap_units}, got {units}")
        return units
    k = max(demand_quantile(spec, settings.order_quantile), 1)
    batch = batch_policy(spec)
    if batch is not None:  # the batch policy's largest order (from just above s) plus room
        s_, S_ = batch
        k = S_ - s_ - 1 + k + _margin(spec)  # S > s: never below the quantile bound
    units = -(-k // q) * q
    return int(min(units, spec.order_cap_units))


def position_cap_for(spec: InstanceSpec) -> int:
    """Automatic cap on the inventory position after ordering.

    The backorder order-up-to level (critical fractile of lead-time demand) bounds the optimal
    lost-sales position after ordering (Morton 1969; Zipkin 2008 — from memory), so a cap a
    little above it never cuts off the optimum, while it keeps every learned policy stable and
    its reachable state space finite for the exact evaluator. Margin: `_margin`. A random lead
    time counts as its longest value (a larger level, so the cap stays on the safe side). With a
    fixed order cost the level is at least the batch policy's S (see `batch_policy`).
    """
    ratio = critical_ratio(spec)
    level = demand_quantile(spec, min(max(ratio, 0.5), 1 - 1e-9), spec.longest_lead_time + 1)
    batch = batch_policy(spec)
    if batch is not None:
        level = max(level, batch[1])
    return int(level + _margin(spec))


def position_floor_for(spec: InstanceSpec) -> int | None:
    """Automatic floor under the inventory position after ordering, or None (no floor).

    Where unmet demand is backordered (the model is its own backorder twin) and one order is
    placed per period, the optimal policy never leaves the position after ordering below the
    base-stock level without a fixed cost, nor below s + 1 of the optimal (s, S) policy with one
    (Scarf 1960; Zheng & Federgruen 1991), so a floor a margin (`_margin`) below that never cuts
    off the optimum. A random lead time counts as its shortest value (a lower level: the safe
    side for a floor). Lost sales keep the position at or above zero by themselves: no floor.

    Why: a DQN greedy policy that orders nothing lets the backlog grow without bound; the
    features then sit at their clip and the costs grow with every period, and the squared
    loss on those costs wrecked the fit. Measured on the agents-mixed instance
    bo-K40-nb-L1-p9 (seed 1, 300 CPU-s): 181.5 % above the optimum without a floor, 0.13 %
    with one (the greedy policy ordered nothing for the first 700,000 steps without it).
    """
    if len(spec.order_slots) > 1 or spec.model_def.backorder_twin(spec) is not spec:
        return None
    if spec.fixed_order_cost > 0:
        batch = batch_policy(spec)
        if batch is None:  # no (s, S) to stand on: no safe floor
            return None
        lowest = batch[0] + 1
    else:
        ratio = critical_ratio(spec)
        shortest = spec.lead_time if spec.lead_time_law is None else int(np.flatnonzero(spec.lead_time_law.probs)[0])
        lowest = demand_quantile(spec, min(max(ratio, 0.5), 1 - 1e-9), shortest + 1)
    return int(lowest - _margin(spec))


def resolved_floor(spec: InstanceSpec, on: bool, cap: int) -> int | None:
    """The floor a scaling gets: `position_floor_for` when the setting is on, none when it is
    off or when a cap (set by hand) lies at or below it (the cap then rules)."""
    floor = position_floor_for(spec) if on else None
    return None if floor is None or (cap > 0 and floor >= cap) else floor


def _margin(spec: InstanceSpec) -> int:
    """Room above a level taken from a policy or a quantile: two standard deviations of
    lead-time demand plus one case pack."""
    sd = float(np.sqrt(spec.demand.var * (spec.longest_lead_time + 1)))
    return int(np.ceil(2 * sd)) + spec.case_pack


def batch_policy(spec: InstanceSpec) -> tuple[int, int] | None:
    """(s, S) of the optimal (s, S) policy of the instance's backorder twin when there is a fixed
    order cost (Zheng & Federgruen 1991), else None (also where the model has no such twin).

    Why: with a fixed order cost the optimum orders in batches (Scarf 1960: (s, S) is optimal
    under backorders), up to S - s - 1 + one period's demand at once and up to a position of S,
    far beyond one period's demand quantile when K is large: on the agents-mixed instance
    bo-K100-L0-p9 (Poisson 10, K = 100) the optimal (s, S) is (5, 48), while the quantile bound
    was 23 units and the cap 22, which held PPO 38 % above the optimum.
    """
    if spec.fixed_order_cost <= 0 or len(spec.order_slots) > 1:
        return None
    twin = spec.model_def.backorder_twin(spec)
    if twin is None:
        return None
    from invbench.baselines.policies.zheng_federgruen import zheng_federgruen
    from invbench.envs.errors import BudgetError
    try:
        zf = zheng_federgruen(twin)
    except (BudgetError, SpecError, ValueError):  # no finite optimum (e.g. free storage): keep the quantile rules
        return None
    return int(zf.s), int(zf.S)


def slot_bounds(spec: InstanceSpec, settings: CommonSettings) -> list[tuple[int, ...]]:
    """Sizes of each slot of a model with several slots: the slot's own legal sizes up to
    `agent.max_order_units` when that is set, else up to the `order_quantile` of one-period
    demand (the first legal size at or above it), as with one slot.

    Why the one-period quantile for every slot: in steady state the orders that matter replace
    about one period's demand (the top stage of a serial chain under echelon base-stock orders
    the last demand; a lower stage orders more only after the stage above ran short, which is
    rare: the optimal policies of the agents-mixed suite's serial instances order above this
    bound in 0.007 % to 0.4 % of periods, those of its dual-sourcing instances never). Wider heads make PPO much slower to learn: on the three-stage serial instance of the
    agents-mixed suite, seed 0, PPO was 4.1 % above the optimum after 120 CPU-seconds with this
    bound (11 or 12 units per stage), 16.9 % with bounds scaled to the model's order caps (33,
    22, 11) and 100 % or more after 60 CPU-seconds with the caps themselves (57, 38, 19).
    """
    out = []
    if settings.max_order_units != AUTO:
        units = int(settings.max_order_units)
        if units > max(s.cap_units for s in spec.order_slots):
            raise SpecError(f"agent.max_order_units: must be <= the largest order cap of the instance's slots "
                            f"{max(s.cap_units for s in spec.order_slots)}, got {units}")
    else:
        units = max(demand_quantile(spec, settings.order_quantile), 1)
    for slot in spec.order_slots:
        sizes = [int(u) for u in slot.sizes_units]
        if settings.max_order_units != AUTO:
            sizes = [u for u in sizes if u <= units]
        else:
            sizes = list(sizes_reaching(sizes, units))
        out.append(tuple(sizes))
    return out


def sizes_reaching(legal: Any, units: int) -> tuple[int, ...]:
    """Legal sizes up to the first one at or above `units` (all of them when none is)."""
    legal = [int(u) for u in legal]
    reach = next((u for u in legal if u >= units), legal[-1])
    return tuple(u for u in legal if u <= reach)


def deficit_rule(spec: InstanceSpec, level: int, slots: list[tuple[int, ...]] | tuple[tuple[int, ...], ...]) -> Any:
    """A crude rule for several slots: every slot orders the shortfall of the inventory position
    below `level` (rounded down to a legal size). With one supplier per slot it over-orders for
    a period; in a serial chain it passes each period's demand up the chain (common practice)."""
    model = spec.model_def
    arrays = [np.asarray(s, dtype=np.int64) for s in slots]

    def act(states: np.ndarray) -> np.ndarray:
        want = np.maximum(level - model.position(spec, states), 0).astype(np.int64)
        cols = [a[np.clip(np.searchsorted(a, want, side="right") - 1, 0, len(a) - 1)] for a in arrays]
        return np.column_stack(cols)
    return act


def deficit_level(spec: InstanceSpec) -> int:
    """Level of the deficit rule: critical-fractile quantile of demand over the periods the
    state spans (the model's lead times), plus one."""
    ratio = critical_ratio(spec)
    return demand_quantile(spec, min(max(ratio, 0.5), 0.999), spec.state_dim + 1)


def reference_cost(spec: InstanceSpec, max_units: int, seed: int = 0,
                   slots: tuple[tuple[int, ...], ...] = ()) -> float:
    """Cost of a rough order-up-to rule (critical-ratio quantile of lead-time demand), by CRN.

    Only a unit and an offset for rewards, so a crude rule is enough; it never enters results.
    With several slots (`slots` given) the deficit rule stands in for it.
    """
    if len(slots) > 1:
        act_k = deficit_rule(spec, deficit_level(spec), slots)
        est = simulate(spec, act_k, replications=16, periods=400, warmup=50, seed=seed)
        return max(est.cost, 1e-6)
    ratio = critical_ratio(spec)
    level = demand_quantile(spec, min(max(ratio, 0.5), 0.999), spec.longest_lead_time + 1)
    q = spec.case_pack

    def act(state: np.ndarray) -> np.ndarray:
        want = np.clip(level - state.sum(axis=1), 0, max_units)
        return (want // q) * q

    est = simulate(spec, act, replications=16, periods=400, warmup=50, seed=seed)
    return max(est.cost, 1e-6)


def scaling_for(spec: InstanceSpec, settings: CommonSettings) -> Scaling:
    """Resolve every `auto` scaling setting from the instance."""
    if len(spec.order_slots) > 1:
        return _multi_scaling(spec, settings)
    units = order_bound(spec, settings)
    obs_scale = float(spec.demand.mean) if settings.obs_scale == AUTO else float(settings.obs_scale)
    obs_scale = max(obs_scale, 1e-6)
    if settings.position_cap == AUTO:
        cap = position_cap_for(spec)
    else:
        cap = int(settings.position_cap)
    need_ref = settings.reward_scale == AUTO or settings.reward_offset == AUTO
    ref = reference_cost(spec, units) if need_ref else 1.0
    scale = ref if settings.reward_scale == AUTO else float(settings.reward_scale)
    offset = ref if settings.reward_offset == AUTO else float(settings.reward_offset)
    floor = resolved_floor(spec, bool(settings.position_floor), cap)
    return Scaling(obs_scale=obs_scale, obs_shift=1.0, reward_offset=float(offset), reward_scale=float(scale),
                   case_pack=spec.case_pack, max_order_units=units, obs_clip=float(settings.obs_clip), position_cap=cap,
                   position_floor=floor)


def _multi_scaling(spec: InstanceSpec, settings: CommonSettings) -> Scaling:
    """Scaling of a model with several order slots: one head per slot, no position cap."""
    if settings.position_cap not in (AUTO, 0):
        raise SpecError(f"agent.position_cap: must be auto or 0 for the {spec.model} model (it places "
                        f"{len(spec.order_slots)} orders per period), got {settings.position_cap}")
    slots = tuple(slot_bounds(spec, settings))
    obs_scale = float(spec.demand.mean) if settings.obs_scale == AUTO else float(settings.obs_scale)
    obs_scale = max(obs_scale, 1e-6)
    need_ref = settings.reward_scale == AUTO or settings.reward_offset == AUTO
    ref = reference_cost(spec, 0, slots=slots) if need_ref else 1.0
    scale = ref if settings.reward_scale == AUTO else float(settings.reward_scale)
    offset = ref if settings.reward_offset == AUTO else float(settings.reward_offset)
    return Scaling(obs_scale=obs_scale, obs_shift=1.0, reward_offset=float(offset), reward_scale=float(scale),
                   case_pack=spec.case_pack, max_order_units=max(s[-1] for s in slots),
                   obs_clip=float(settings.obs_clip), position_cap=0, slot_sizes=slots)
