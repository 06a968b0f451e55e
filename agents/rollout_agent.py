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
  4. the network is the next current policy; the best one on the CRN learning curve is kept.
The first current policy is the best order-up-to rule on the inventory position (by CRN search).
Models with several order slots (one network head per slot): the candidates per state are the
product of the slots' sizes when it has at most 64 members, else coordinate-wise (one slot
varied over its sizes, the others at the current policy's order); each head is fitted to its
slot's values (see `rollout_slots.py`), and the first policy is the best "deficit rule" (every
slot orders the position's shortfall below a level, by CRN search over the level).
Every period of every path is one call of the model's step function on the whole batch, or, where
the model's rules are compiled and the policy is a network or a linear order rule, all periods
of all paths run in one compiled loop with the same numbers (`rollout_kernels.py`).
"""
from __future__ import annotations

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
from .rollout_kernels import OrderUpTo, compiled_rollout_q, compiled_sample_states
from .scaling import Scaling
from .settings import AUTO, CommonSettings, setting


@dataclass
class RolloutSettings(CommonSettings):
    """Hyper-parameters of the rollout agent (the common ones are inherited)."""

    hidden: tuple[int, ...] = setting((64, 64), "ints", "hidden layer widths of the policy network", 1, 4096)
    activation: str = setting("relu", "str", "hidden activation", choices=("tanh", "relu"))
    iterations: int = setting(6, "int", "policy-improvement rounds (the step/CPU budget may stop earlier)", 1, 1000)
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
                      monitor: Any) -> tuple[LearnedPolicy, int]:
    """Approximate policy iteration until `iterations`, the step budget or the CPU budget ends it."""
    rng = np.random.default_rng(seed)
    gen = torch.Generator().manual_seed(seed)
    torch.manual_seed(seed)
    sizes = scaling.order_sizes_units
    horizon = 8 * (spec.longest_lead_time + 1) + 16 if s.horizon == AUTO else int(s.horizon)
    if scaling.n_slots > 1:
        horizon = 8 * (spec.state_dim + 1) + 16 if s.horizon == AUTO else int(s.horizon)
        return _run_slots(spec, s, scaling, steps, seed, monitor, rng, gen, horizon)
    _, act = best_order_up_to(spec, scaling.max_order_units, seed)

    def act_index(states: np.ndarray) -> np.ndarray:
        return np.asarray(act(states)) // spec.case_pack
    head = "logits" if s.fit == "classify" else "q_values"
    arch = architecture(spec.state_dim, s.hidden, scaling.n_actions, s.activation, head)
    net = PolicyNet(arch)
    policy: LearnedPolicy | None = None
    done = 0
    for it in range(s.iterations):
        states, n = sample_states(spec, act, s, rng)
        q = rollout_q(spec, act, states, sizes, s.rollouts, horizon, rng)
        done += n + q.size * s.rollouts * (horizon + 1)
        # candidates the position cap would clip are not realisable labels
        k = np.arange(len(sizes))
        real = scaling.orders(np.repeat(states, len(k), axis=0), np.tile(k, len(states))).reshape(q.shape)
        mask = real == sizes[None, :]
        q = np.where(mask, q, np.inf)
        if not s.warm_start:
            net = PolicyNet(arch)
        if s.fit == "classify":
            acc = fit_classifier(net, scaling.features(states), q.argmin(axis=1).astype(np.int64), s, gen)
        else:
            here = np.take_along_axis(q, act_index(states)[:, None], axis=1)
            adv = np.where(mask, (q - here) / scaling.reward_scale, 0.0)
            acc = fit_regressor(net, scaling.features(states), adv, mask, s, gen)
        policy = LearnedPolicy(spec, scaling, _copy(net, arch), agent="rollout",
                               meta={"iteration": it + 1, "train_accuracy": acc})
        act = policy.act
        monitor.advance(done, lambda p=policy: p, force=True)
        if done >= steps or monitor.out_of_time():
            break
    assert policy is not None
    return policy, done


def _copy(net: PolicyNet, arch: dict[str, Any]) -> PolicyNet:
    out = PolicyNet(arch, init=False)
    out.load_state_dict(net.state_dict())
    return out.eval()


def _run_slots(spec: InstanceSpec, s: RolloutSettings, scaling: Scaling, steps: int, seed: int, monitor: Any,
               rng: np.random.Generator, gen: torch.Generator, horizon: int) -> tuple[LearnedPolicy, int]:
    """The loop above for a model with several order slots (one head per slot)."""
    from .rollout_slots import best_deficit_rule, candidates, head_values, to_index
    _, act = best_deficit_rule(spec, scaling, seed)
    head = "logits" if s.fit == "classify" else "q_values"
    arch = architecture(spec.state_dim, s.hidden, scaling.n_outputs, s.activation, head, scaling.slot_counts)
    net = PolicyNet(arch)
    policy: LearnedPolicy | None = None
    done = 0
    for it in range(s.iterations):
        states, n = sample_states(spec, act, s, rng)
        current = act_unique(act, states).reshape(len(states), scaling.n_slots)
        first = candidates(scaling, current)
        q = rollout_q(spec, act, states, first, s.rollouts, horizon, rng)
        done += n + q.size * s.rollouts * (horizon + 1)
        values = head_values(scaling, first, q)
        cur = to_index(scaling, current)
        if not s.warm_start:
            net = PolicyNet(arch)
        x = scaling.features(states)
        if s.fit == "classify":
            labels = np.column_stack([v.argmin(axis=1) for v in values]).astype(np.int64)
            acc = _fit_heads_classifier(net, x, labels, scaling.slot_counts, s, gen)
        else:
            here = values[0][np.arange(len(states)), cur[:, 0]][:, None]
            adv = np.concatenate([(v - here) / scaling.reward_scale for v in values], axis=1)
            acc = fit_regressor(net, x, adv, np.ones_like(adv, dtype=bool), s, gen)
        policy = LearnedPolicy(spec, scaling, _copy(net, arch), agent="rollout",
                               meta={"iteration": it + 1, "train_accuracy": acc})
        act = policy.act
        monitor.advance(done, lambda p=policy: p, force=True)
        if done >= steps or monitor.out_of_time():
            break
    assert policy is not None
    return policy, done


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
