"""Our tailored agent: approximate policy iteration with simulation-based rollouts (`rollout`).

Method family: rollout and approximate policy iteration (Bertsekas & Tsitsiklis, 1996,
*Neuro-Dynamic Programming*, Athena Scientific), in the form used for lost-sales inventory by
Temizöz, Imdahl, Dijkman, Lamghari-Idrissi & van Jaarsveld (2023), "Deep controlled learning
for inventory control": sample states from the current policy, estimate every candidate order's
cost-to-go by simulating it and then the current policy, with common random numbers across the
candidates, and fit a policy network over order sizes to those estimates.

One iteration, top to bottom:
  1. run the current policy from the empty state, keep every `state_spacing`-th state;
  2. for each kept state s, each candidate order a and each of `rollouts` demand paths (the same
     paths for all a): order a now, then follow the current policy for `horizon` periods;
     Q(s, a) is the mean total cost;
  3. fit the network: by default (`fit = "regress"`) least squares on the advantages
     Q(s, a) - Q(s, current order), acting by the argmin of the fitted values; or
     (`fit = "classify"`) cross-entropy on the labels argmin_a Q(s, a), as in the classifier
     form of the method. Measured on the classic grid, the regression is far less hurt by
     the rollout noise of rare, costly stockouts (an argmin of noisy estimates is biased);
  4. the network is the next current policy. With `damping` < 1 the regression targets are
     averaged with the previous round's fitted values, so the greedy policy moves gradually
     (an averaged-Q form of policy iteration); a size the position cap would clip gets the
     value of the clipped order (what that action really does), so the greedy choice never
     lands on an untrained output.
The first current policy is the cheapest classical policy for the instance, optimised by the
bench's own search (`rollout_start.py`; e.g. (s, S) with a fixed order cost), within
`start_share` of the CPU budget; the automatic order bound and position cap are widened to
cover what it does. Rounds go on until the step or CPU budget ends the run (`iterations` is
only a cap; the last round is shortened to the time left). The returned policy is the best of
the start and every round on an evaluation independent of the training rollouts
(`rollout_judge.py`): never worse than the start on that judge, and the start itself when no
round beats it. Models with several order slots run through the same loop (one network head
per slot; candidates and per-head targets in `rollout_slots.py`); without a classical policy
for the instance, the start is the agent's own rule (order-up-to on the position; for several
slots the "deficit rule"), as with `start = "rule"`.
Every period of every path is one call of the model's step function on the whole batch, or, where
the model's rules are compiled and the policy is a network or a linear order rule, all periods
of all paths run in one compiled loop with the same numbers (`rollout_kernels.py`).
"""
from __future__ import annotations

import dataclasses
import sys
import time
from dataclasses import dataclass
from typing import Any

import numpy as np
import torch
from torch import nn

from invbench.envs.dynamics import initial_state, step_fn
from invbench.envs.random_inputs import PeriodInputs
from invbench.envs.spec import InstanceSpec

from .learned_policy import LearnedPolicy
from .network import PolicyNet, architecture
from .rollout_judge import Judge, RolloutRun, round_states, widen_for
from .rollout_kernels import OrderUpTo, compiled_rollout_q, compiled_sample_states
from .scaling import Scaling
from .settings import AUTO, CommonSettings, setting


@dataclass
class RolloutSettings(CommonSettings):
    """Hyper-parameters of the rollout agent (the common ones are inherited)."""

    hidden: tuple[int, ...] = setting((64, 64), "ints", "hidden layer widths of the policy network", 1, 4096)
    activation: str = setting("relu", "str", "hidden activation", choices=("tanh", "relu"))
    iterations: Any = setting(AUTO, "int", "cap on policy-improvement rounds (auto: none; the step or CPU budget "
                              "ends the run)", 1, 10**6, auto=True)
    states_per_iteration: int = setting(1500, "int", "states labelled per round", 1, 10**7)
    rollouts: int = setting(32, "int", "common-random-number demand paths per state", 1, 10**5)
    horizon: Any = setting(AUTO, "int", "periods simulated after the first order (auto: 8 (L+1) + 16)", 1, 10**5, auto=True)
    chains: int = setting(100, "int", "parallel trajectories the states are sampled from", 1, 10**6)
    state_warmup: int = setting(100, "int", "periods run before the first state is kept", 0, 10**6)
    state_spacing: int = setting(5, "int", "periods between kept states on one trajectory", 1, 10**6)
    epochs: int = setting(60, "int", "training passes over each round's labels", 1, 10**5)
    batch_size: int = setting(256, "int", "minibatch size of the classifier", 1, 10**7)
    learning_rate: float = setting(1e-3, "float", "Adam step size of the classifier", 0.0, 1.0, True)
    warm_start: bool = setting(True, "bool", "start each round's fit from the previous network")
    fit: str = setting("regress", "str", "classify: cross-entropy on argmin labels; regress: least squares on "
                  "rollout advantages, act by their argmin", choices=("classify", "regress"))
    damping: float = setting(0.5, "float", "weight of a round's new regression targets; the rest is the previous "
                             "round's fitted values (1: no damping)", 0.0, 1.0, True)
    start: str = setting("classical", "str", "first policy: the cheapest optimised classical policy for the instance, "
                         "or the agent's own rule", choices=("classical", "rule"))
    start_share: float = setting(0.15, "float", "share of max_cpu_seconds the search for the first policy may use "
                                 "(later policies are skipped)", 0.0, 1.0)


# ---------------------------------------------------------------------------- policies
def _keys(states: np.ndarray) -> np.ndarray:
    """Collision-free integer key per state row (non-negative, bounded lost-sales states)."""
    s = states - states.min(axis=0)
    radix = s.max(axis=0).astype(np.int64) + 1
    key = np.zeros(len(s), dtype=np.int64)
    for i in range(s.shape[1]):
        key = key * radix[i] + s[:, i]
    return key


def act_unique(act: Any, states: np.ndarray) -> np.ndarray:
    """`act` on each distinct state once: rollout batches repeat the same few states a lot."""
    keys = _keys(states)
    uniq, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    return np.asarray(act(states[first]), dtype=np.int64)[inverse]


def order_up_to(level: int, spec: InstanceSpec, max_units: int) -> Any:
    """The start rule: a callable the compiled rollouts also run (`rollout_kernels.OrderUpTo`)."""
    return OrderUpTo(level, spec, max_units)


def best_order_up_to(spec: InstanceSpec, max_units: int, seed: int) -> tuple[int, Any]:
    """The order-up-to level with the lowest CRN cost, by a scan around the critical fractile."""
    from invbench.experiments.simulate import simulate
    from .scaling import demand_quantile
    from invbench.envs.newsvendor import critical_ratio
    ratio = critical_ratio(spec)
    centre = demand_quantile(spec, min(max(ratio, 0.5), 0.9999), spec.longest_lead_time + 1)
    best = None
    for level in range(max(centre - 12, 0), centre + 4):
        c = simulate(spec, order_up_to(level, spec, max_units), replications=32, periods=600, warmup=100, seed=seed).cost
        if best is None or c < best[0]:
            best = (c, level)
    return best[1], order_up_to(best[1], spec, max_units)


# ---------------------------------------------------------------------------- one iteration
def sample_states(spec: InstanceSpec, act: Any, s: RolloutSettings, rng: np.random.Generator) -> tuple[np.ndarray, int]:
    """States visited by the current policy after a warm-up; returns them and periods simulated."""
    step = step_fn(spec)
    inputs = PeriodInputs(spec)  # a random lead time's cut-off (none for most instances)
    per_chain = -(-s.states_per_iteration // s.chains)
    state = initial_state(spec, s.chains)
    periods = s.state_warmup + per_chain * s.state_spacing
    fast = compiled_sample_states(spec, act, s.chains, s.state_warmup, s.state_spacing, per_chain, state, rng)
    if fast is not None:  # the same draws and states, in one compiled loop (rollout_kernels.py)
        return fast.reshape(-1, spec.state_dim)[: s.states_per_iteration], periods * s.chains
    kept = []
    for t in range(periods):
        if t >= s.state_warmup and (t - s.state_warmup) % s.state_spacing == 0:
            kept.append(state.copy())
        order = act_unique(act, state)
        extra = inputs.draw([rng] * len(inputs.names), s.chains)
        state, _ = step(state, order, spec.demand.sample(rng, s.chains), **extra)
    states = np.concatenate(kept)[: s.states_per_iteration]
    return states, periods * s.chains


def rollout_q(spec: InstanceSpec, act: Any, states: np.ndarray, sizes: np.ndarray, rollouts: int, horizon: int,
              rng: np.random.Generator) -> np.ndarray:
    """Q[N, K]: mean cost of ordering sizes[k] in state n, then following `act` for `horizon` periods.

    All K candidates of one state see the same `rollouts` demand paths (common random numbers).
    `sizes` may instead be first orders [N, K, k] per state for a model with k order slots.
    """
    step = step_fn(spec)
    N, K, M = len(states), (len(sizes) if np.ndim(sizes) == 1 else sizes.shape[1]), rollouts
    u = rng.random((horizon + 1, N, 1, M))
    if np.ndim(sizes) == 1:
        order = np.tile(np.repeat(sizes, M), N)
    else:
        order = np.repeat(sizes.reshape(N * K, -1), M, axis=0)
    fast = compiled_rollout_q(spec, act, states, order.reshape(N * K * M, -1), K, M, u)
    if fast is not None:  # the same rows and uniforms, in one compiled loop (rollout_kernels.py)
        return fast.reshape(N, K, M).mean(axis=2)
    u = np.broadcast_to(u, (horizon + 1, N, K, M)).reshape(horizon + 1, N * K * M)
    inputs = PeriodInputs(spec)  # other random inputs (a lead-time cut-off): common to the K too
    v = []
    for law in inputs.laws:
        x = rng.random((horizon + 1, N, 1, M, law.width))
        x = np.broadcast_to(x, (horizon + 1, N, K, M, law.width)).reshape(horizon + 1, N * K * M, law.width)
        v.append(x[..., 0] if law.width == 1 else x)
    state = np.repeat(states, K * M, axis=0)
    total = np.zeros(N * K * M)
    for t in range(horizon + 1):
        if t > 0:
            order = act_unique(act, state)
        extra = inputs.from_uniforms([x[t] for x in v])
        state, parts = step(state, order, spec.demand.from_uniforms(u[t]), **extra)
        total += parts.total
    return total.reshape(N, K, M).mean(axis=2)


def _train_epochs(net: PolicyNet, n: int, loss: Any, s: RolloutSettings, gen: torch.Generator) -> None:
    """Adam over `s.epochs` shuffled passes of minibatches; `loss(idx)` gives a minibatch's loss."""
    opt = torch.optim.Adam(net.parameters(), lr=s.learning_rate)
    net.train()
    for _ in range(s.epochs):
        perm = torch.randperm(n, generator=gen)
        for i in range(0, n, s.batch_size):
            opt.zero_grad()
            loss(perm[i:i + s.batch_size]).backward()
            opt.step()
    net.eval()


def fit_regressor(net: PolicyNet, x: np.ndarray, adv: np.ndarray, mask: np.ndarray, s: RolloutSettings,
                  gen: torch.Generator) -> float:
    """Least-squares fit of the net's outputs to minus the advantages (masked candidates left out).

    Noisy per-state Q estimates average out across neighbouring states in a regression, while
    an argmin label taken from them is biased towards whichever candidate had lucky paths.
    Returns the share of states whose fitted argmax equals the rollout argmin.
    """
    X, T, W = torch.from_numpy(x), torch.from_numpy(-adv.astype(np.float32)), torch.from_numpy(mask.astype(np.float32))

    def loss(idx: torch.Tensor) -> torch.Tensor:
        err = (net(X[idx]) - T[idx]) ** 2 * W[idx]
        return err.sum() / W[idx].sum().clamp(min=1.0)

    _train_epochs(net, len(X), loss, s, gen)
    with torch.no_grad():
        out = net(X).masked_fill(W == 0, -torch.inf)
        return float((out.argmax(dim=1) == T.masked_fill(W == 0, -torch.inf).argmax(dim=1)).float().mean())


def fit_classifier(net: PolicyNet, x: np.ndarray, y: np.ndarray, s: RolloutSettings, gen: torch.Generator) -> float:
    """Cross-entropy fit of `net` to labels `y`; returns the final training accuracy."""
    loss_fn = nn.CrossEntropyLoss()
    X, Y = torch.from_numpy(x), torch.from_numpy(y)
    _train_epochs(net, len(X), lambda idx: loss_fn(net(X[idx]), Y[idx]), s, gen)
    with torch.no_grad():
        return float((net(X).argmax(dim=1) == Y).float().mean())


# ---------------------------------------------------------------------------- the loop
def run_rollout_agent(spec: InstanceSpec, s: RolloutSettings, scaling: Scaling, steps: int, seed: int,
                      monitor: Any) -> RolloutRun:
    """Approximate policy iteration until the step or CPU budget (or the `iterations` cap) ends it.

    One loop for one or several order slots (one network head per slot). Returns the judged
    best policy (see `rollout_judge.py`) beside the last round's.
    """
    from .rollout_slots import candidates, head_values, to_index
    rng = np.random.default_rng(seed)
    gen = torch.Generator().manual_seed(seed)
    torch.manual_seed(seed)
    k = scaling.n_slots
    lead = spec.longest_lead_time if k == 1 else spec.state_dim
    horizon = 8 * (lead + 1) + 16 if s.horizon == AUTO else int(s.horizon)
    cap = 10**6 if s.iterations == AUTO else int(s.iterations)
    act, start = first_policy(spec, s, scaling, seed, monitor)
    judge = Judge(monitor.simulated_cost, monitor.confirm_exact)
    if start.get("policy") is not None:
        judge.offer("classical", start["policy"], monitor.record(0, start["policy"]), monitor.last_simulated)
    states, done = sample_states(spec, act, s, rng)
    scaling = widen_for(spec, scaling, act, states, s)
    head = "logits" if s.fit == "classify" else "q_values"
    arch = architecture(spec.state_dim, s.hidden, scaling.n_outputs, s.activation, head,
                        scaling.slot_counts if k > 1 else None)
    net, trained = PolicyNet(arch), False
    policy: Any = start.get("policy")
    final, it, last_cpu = policy, 0, 0.0
    while it < cap and (it == 0 or (done < steps and not monitor.out_of_time())):  # at least one round
        c0 = monitor.cpu_seconds()
        if it > 0:
            left = s_max - c0 if (s_max := monitor.max_cpu_seconds) > 0 else None
            n_states = round_states(s.states_per_iteration, last_cpu, left, s.chains)
            if n_states == 0:
                break
            states, n = sample_states(spec, act, dataclasses.replace(s, states_per_iteration=n_states), rng)
            done += n
        current = act_unique(act, states).reshape(len(states), k)
        if k > 1:  # a state the widening did not see may get a start order beyond a head: snap it
            current = np.column_stack([scaling.slot_units(j)[ix] for j, ix in enumerate(to_index(scaling, current).T)])
        first = scaling.order_sizes_units if k == 1 else candidates(scaling, current)
        q = rollout_q(spec, act, states, first, s.rollouts, horizon, rng)
        done += q.size * s.rollouts * (horizon + 1)
        if k == 1:  # a size the position cap clips is the clipped order: it gets that order's value
            j = np.arange(q.shape[1])
            real = scaling.orders(np.repeat(states, len(j), axis=0), np.tile(j, len(states))).reshape(q.shape)
            values = [np.take_along_axis(q, real // scaling.case_pack, axis=1)]
        else:
            values = head_values(scaling, first, q)
        if not s.warm_start:
            net, trained = PolicyNet(arch), False
        x = scaling.features(states)
        if s.fit == "classify":
            labels = np.column_stack([v.argmin(axis=1) for v in values]).astype(np.int64)
            acc = _fit_heads_classifier(net, x, labels, scaling.slot_counts, s, gen)
        else:
            adv = advantages(values, to_index(scaling, current), scaling.reward_scale)
            mask = np.isfinite(adv)
            target = -np.where(mask, adv, 0.0)
            if trained and s.damping < 1:  # average with the previous round's fitted values
                with torch.no_grad():
                    prev = net(torch.from_numpy(x)).numpy().astype(np.float64)
                target = s.damping * target + (1 - s.damping) * prev
            acc = fit_regressor(net, x, -target, mask, s, gen)
        trained, it = True, it + 1
        policy = LearnedPolicy(spec, scaling, _copy(net, arch), agent="rollout",
                               meta={"iteration": it, "train_accuracy": acc})
        final, act = policy, policy.act
        monitor.advance(done, lambda p=policy: p, force=True)
        judge.offer(f"round {it}", policy, monitor.rows[-1], monitor.last_simulated)
        last_cpu = monitor.cpu_seconds() - c0
    best = judge.best.policy if judge.best is not None else final
    label = judge.best.label if judge.best is not None else "final"
    chosen = "classical" if label == "classical" else ("final" if best is final else "best")
    return RolloutRun(final, done, best, chosen, it, {k2: v for k2, v in start.items() if k2 != "policy"},
                      judge.history)


def advantages(values: list[np.ndarray], current: np.ndarray, unit: float) -> np.ndarray:
    """Per head, each size's rollout value less the current order's (inf where not realisable).

    One reference per state (the first head's current order) keeps the heads on one scale; a
    current order that is itself not realisable falls back to the state's cheapest candidate.
    """
    v0 = values[0]
    here = v0[np.arange(len(v0)), np.clip(current[:, 0], 0, v0.shape[1] - 1)]
    here = np.where(np.isfinite(here), here, v0.min(axis=1))[:, None]
    return np.concatenate([(v - here) / unit for v in values], axis=1)


def first_policy(spec: InstanceSpec, s: RolloutSettings, scaling: Scaling, seed: int,
                 monitor: Any) -> tuple[Any, dict[str, Any]]:
    """The starting policy's `act` and what it is: the cheapest classical policy for the instance
    (`rollout_start.py`), else (or with `start = "rule"`) the agent's own simple rule."""
    if s.start == "classical":
        from .rollout_start import best_classical
        budget = s.start_share * monitor.max_cpu_seconds
        choice = best_classical(spec, budget)
        if choice is not None:
            if s.progress:
                print(f"rollout: starts from {choice.name} {choice.params} (average cost {choice.cost:.4f}), "
                      f"found in {choice.cpu_seconds:.1f} CPU s"
                      + (f" = {100 * choice.cpu_seconds / monitor.max_cpu_seconds:.1f} % of the budget"
                         if monitor.max_cpu_seconds > 0 else ""), file=sys.stderr)  # stdout may carry --json
            return choice.policy.act, {**choice.to_dict(), "policy": choice.policy}
    c0 = time.process_time()
    if scaling.n_slots > 1:
        from .rollout_slots import best_deficit_rule
        level, act = best_deficit_rule(spec, scaling, seed)
        name = "deficit_rule"
    else:
        level, act = best_order_up_to(spec, scaling.max_order_units, seed)
        name = "order_up_to"
    return act, {"name": name, "params": {"level": int(level)}, "cpu_seconds": time.process_time() - c0,
                 "policy": None}


def _copy(net: PolicyNet, arch: dict[str, Any]) -> PolicyNet:
    out = PolicyNet(arch, init=False)
    out.load_state_dict(net.state_dict())
    return out.eval()


def _fit_heads_classifier(net: PolicyNet, x: np.ndarray, y: np.ndarray, heads: list[int], s: RolloutSettings,
                          gen: torch.Generator) -> float:
    """Cross-entropy summed over the heads; returns the share of (state, slot) labels matched."""
    loss_fn = nn.CrossEntropyLoss()
    X, Y = torch.from_numpy(x), torch.from_numpy(y)

    def loss(idx: torch.Tensor) -> torch.Tensor:
        parts = torch.split(net(X[idx]), heads, dim=1)
        return sum(loss_fn(p, Y[idx, j]) for j, p in enumerate(parts))  # type: ignore[return-value]

    _train_epochs(net, len(X), loss, s, gen)
    with torch.no_grad():
        pred = torch.stack([p.argmax(dim=1) for p in torch.split(net(X), heads, dim=1)], dim=1)
        return float((pred == Y).float().mean())
