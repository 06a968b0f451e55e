"""The two suites a portfolio run is made of, built in memory and run by the bench's own driver
(`experiments.runner.run_bench`): resumable cell files, backends, damaged-cell handling and the
results table come from there.

A portfolio needs a suite whose cells are chosen pairs (an optimum only where it is tractable;
in the robustness stage each item's own policy on its own alternatives), not every instance
times every policy: `PairedSuite` lists them.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.spec import InstanceSpec, spec_from_dict
from invbench.experiments.suite import Cell, PolicyEntry, Suite

#: The policy a robustness cell measures: built on model A, evaluated on model B.
FIXED_POLICY_FUNCTION = "invbench.portfolio.suites:fixed_policy"
#: Policies left out by default: optimising a constant order takes long and it is never the best.
DEFAULT_SKIP = ("constant_order",)
OPTIMUM = PolicyEntry("optimum", "optimum", name="optimum", seeds=(0,))


@dataclass(frozen=True)
class PairedSuite(Suite):
    """A suite whose cells are the listed (instance index, policy index) pairs, optimum cells
    first, so the gap of every other cell is known while the run goes on."""

    pairs: tuple[tuple[int, int], ...] = ()

    def cells(self, skip_kinds: tuple[str, ...] = ()) -> list[Cell]:
        order = sorted(self.pairs, key=lambda ij: self.policies[ij[1]].kind != "optimum")
        out = []
        for i, j in order:
            p = self.policies[j]
            if p.kind in skip_kinds:
                continue
            ev = {**self.evaluation, **p.evaluation}
            out.extend(Cell(self.name, self.instances[i], p, seed, ev) for seed in p.seeds)
        return out


def suite_name(text: str) -> str:
    """A suite (and folder) name from any text: a plain word of at most 60 characters."""
    name = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("._-")[:60]
    return name or "portfolio"


def optimum_refusal(spec: InstanceSpec, max_states: int) -> str:
    """Why the exact optimum of `spec` is out of reach ("" when it is tractable), judged from
    the solver's own size estimate before anything is built."""
    from invbench.baselines.exact import RVI_MAX_ITER, exact_space, expected_iterations

    try:
        space = exact_space(spec)
        est = space.estimate(space.initial_bounds())
    except (SpecError, BudgetError) as e:
        return str(e).splitlines()[0]
    if est.states > max_states:
        return f"about {est.states:,} states, over --max-states {max_states:,}"
    if spec.discount == 1 and expected_iterations(spec) > RVI_MAX_ITER:
        return "orders last so long that relative value iteration would not converge"
    return ""


def classical_policies(names: Sequence[str] | None, models: set[str]) -> list[str]:
    """The classical policies to try: given names (checked), or every policy defined for at
    least one of the models, less `DEFAULT_SKIP`."""
    from invbench.baselines.policies.registry import policies_for, policy_names

    known = policy_names()
    if names is None:
        return [n for n in known if n not in DEFAULT_SKIP and any(n in policies_for(m) for m in models)]
    for n in names:
        if n not in known:
            raise SpecError(f"--policies: each must be one of {', '.join(known)}, got {n!r}")
    if not names:
        raise SpecError(f"--policies: at least one of {', '.join(known)}")
    return list(dict.fromkeys(names))


def choice_suite(name: str, specs: Sequence[InstanceSpec], policies: Sequence[str], max_states: int,
                 seed: int = 0, agent: Mapping[str, Any] | None = None,
                 description: str = "") -> tuple[PairedSuite, dict[str, str]]:
    """Stage 1: per item the optimum (where tractable), every classical policy it supports,
    optimised, and optionally an agent. Returns the suite and item -> why no optimum."""
    from invbench.baselines.policies.registry import supports

    entries = [OPTIMUM] + [PolicyEntry("classical", p, name=p, seeds=(seed,)) for p in policies]
    if agent:
        entries.append(PolicyEntry("agent", agent["agent"], agent=agent["agent"], steps=int(agent["steps"]),
                                   settings=dict(agent.get("settings") or {}), seeds=(seed,),
                                   cpu_seconds=float(agent.get("cpu_seconds") or 0.0)))
    pairs: list[tuple[int, int]] = []
    no_optimum: dict[str, str] = {}
    for i, spec in enumerate(specs):
        why = optimum_refusal(spec, max_states)
        if why:
            no_optimum[spec.label] = why
        else:
            pairs.append((i, 0))
        for j, e in enumerate(entries[1:], start=1):
            if e.kind != "classical" or supports(e.name, spec):
                pairs.append((i, j))
    suite = PairedSuite(name, description, tuple(specs), tuple(entries), {}, invented=False, pairs=tuple(pairs))
    return suite, no_optimum


def fixed_policy(spec: InstanceSpec, params: dict[str, Any], seed: int, evaluation: dict[str, Any]) -> Any:
    """Custom-cell function: the policy chosen on model A (`params["model_a"]`), with its chosen
    parameters, to be measured on this cell's instance (model B). Built on A, because some
    policies (PIL, myopic) read the demand law they were built for."""
    from invbench.baselines.policies.registry import make_policy

    a = params["model_a"]
    b = spec.to_dict()
    if a.get("lead_time") != b.get("lead_time"):  # B's lead time (its state layout), A's demand law
        a = {**a, "lead_time": b["lead_time"]}
    return make_policy(spec_from_dict(a), params["policy"], params.get("params") or None)


def robustness_suite(name: str, choices: Mapping[str, tuple[InstanceSpec, str, dict[str, Any]]],
                     alternatives: Sequence[Any], max_states: int,
                     description: str = "") -> tuple[PairedSuite, dict[str, str]]:
    """Stage 2: for every alternative B of an item, B's optimum and the item's chosen policy
    (`choices[item] = (model A, policy name, parameters)`) measured on B. Alternatives whose
    optimum is out of reach, or that the chosen policy does not support (e.g. a random lead
    time), are left out (no regret without them): returns label -> why."""
    from invbench.baselines.policies.registry import supports

    specs: list[InstanceSpec] = []
    entries: list[PolicyEntry] = [OPTIMUM]
    entry_of: dict[str, int] = {}
    pairs: list[tuple[int, int]] = []
    left_out: dict[str, str] = {}
    for alt in alternatives:
        if alt.item not in choices:
            continue
        why = optimum_refusal(alt.spec, max_states)
        if not why and not supports(choices[alt.item][1], alt.spec):
            why = f"the chosen policy {choices[alt.item][1]} does not support this instance"
        if why:
            left_out[alt.spec.label] = why
            continue
        if alt.item not in entry_of:
            a, policy, params = choices[alt.item]
            entry_of[alt.item] = len(entries)
            entries.append(PolicyEntry("custom", f"chosen:{alt.item}", name=policy, function=FIXED_POLICY_FUNCTION,
                                       params={"policy": policy, "params": dict(params), "model_a": a.to_dict()}))
        specs.append(alt.spec)
        pairs += [(len(specs) - 1, 0), (len(specs) - 1, entry_of[alt.item])]
    suite = PairedSuite(name, description, tuple(specs), tuple(entries), {}, pairs=tuple(pairs))
    return suite, left_out
