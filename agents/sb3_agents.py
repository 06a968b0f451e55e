"""Building stable-baselines3 agents on the batch simulator, and taking their greedy network out.

PPO and A2C act by the argmax of the actor's logits, DQN by the argmax of its Q-values; either
chain of linear layers is copied into a `PolicyNet` so the export never depends on SB3's files.
With several order slots PPO and A2C act on a `MultiDiscrete` space: SB3's action net then
emits the slots' logits concatenated, which is exactly our one-head-per-slot layout. DQN acts
on `Discrete` spaces only, so it is refused for such models before anything is built.
"""
from __future__ import annotations

from typing import Any

from torch import nn

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from .dqn_loss import dqn_class
from .learned_policy import LearnedPolicy
from .network import ACTIVATIONS, from_linears
from .scaling import Scaling
from .settings import SB3Settings
from .vec_env import InventorySB3VecEnv


#: agents that handle one order slot only, with the reason given when refused
SINGLE_SLOT_ONLY = {"dqn": "stable-baselines3's DQN supports Discrete action spaces only, not MultiDiscrete"}


def check_agent_fits(agent: str, spec: InstanceSpec) -> None:
    """Refuse an agent that cannot act on the model's order slots, before any work."""
    k = len(spec.order_slots)
    if k > 1 and agent in SINGLE_SLOT_ONLY:
        raise SpecError(f"agent: {agent} cannot train on the {spec.model} model, which places {k} orders per "
                        f"period ({SINGLE_SLOT_ONLY[agent]}); use ppo, a2c or rollout")


def make_model(agent: str, spec: InstanceSpec, settings: SB3Settings, scaling: Scaling, seed: int) -> Any:
    """An SB3 model of `agent` on the batch simulator, seeded, CPU only."""
    from stable_baselines3 import A2C, PPO

    check_agent_fits(agent, spec)
    env = InventorySB3VecEnv(spec, int(settings.n_envs), scaling, episode_length=settings.episode_length, seed=seed)
    act_fn = ACTIVATIONS[settings.activation]
    hidden = list(settings.hidden)
    s = settings
    if agent == "ppo":
        return PPO("MlpPolicy", env, learning_rate=s.learning_rate, n_steps=s.n_steps, batch_size=s.batch_size,
                   n_epochs=s.n_epochs, gamma=s.gamma, gae_lambda=s.gae_lambda, clip_range=s.clip_range,
                   ent_coef=s.ent_coef, vf_coef=s.vf_coef, max_grad_norm=s.max_grad_norm,
                   policy_kwargs=dict(net_arch=dict(pi=hidden, vf=hidden), activation_fn=act_fn),
                   seed=seed, device="cpu", verbose=0)
    if agent == "a2c":
        return A2C("MlpPolicy", env, learning_rate=s.learning_rate, n_steps=s.n_steps, gamma=s.gamma,
                   gae_lambda=s.gae_lambda, ent_coef=s.ent_coef, vf_coef=s.vf_coef, max_grad_norm=s.max_grad_norm,
                   policy_kwargs=dict(net_arch=dict(pi=hidden, vf=hidden), activation_fn=act_fn),
                   seed=seed, device="cpu", verbose=0)
    if agent == "dqn":
        return dqn_class(s.td_loss)("MlpPolicy", env, learning_rate=LinearDecay(float(s.learning_rate), s.lr_final_share),
                   buffer_size=s.buffer_size,
                   learning_starts=s.learning_starts, batch_size=s.batch_size, gamma=s.gamma,
                   train_freq=s.train_freq, gradient_steps=s.gradient_steps,
                   target_update_interval=s.target_update_interval, exploration_fraction=s.exploration_fraction,
                   exploration_final_eps=s.exploration_final_eps,
                   policy_kwargs=dict(net_arch=hidden, activation_fn=act_fn), seed=seed, device="cpu", verbose=0)
    raise ValueError(f"unknown SB3 agent {agent!r}")


class LinearDecay:
    """SB3 learning-rate schedule: `start` at the beginning, `start * final_share` at the end.

    Why for DQN: with a constant step size its greedy policy kept drifting late in the run
    (Robbins-Monro: stochastic approximation needs step sizes that go to zero). Measured on
    agents-mixed instances, seed 0, 120 CPU-s each, best learning-curve point kept: ls-pois-L2-p19
    6.2 % -> 3.9 %, per-m3-L2-fifo 14.8 % -> 2.0 % (constant -> decay to 0). SB3 passes the
    remaining progress (1 -> 0), which follows CPU when the CPU budget ends the run (callbacks.py).
    """

    def __init__(self, start: float, final_share: float) -> None:
        self.start, self.final_share = start, final_share

    def __call__(self, progress_remaining: float) -> float:
        p = min(max(progress_remaining, 0.0), 1.0)
        return self.start * (self.final_share + (1.0 - self.final_share) * p)


def _linears(seq: nn.Module) -> list[nn.Linear]:
    return [m for m in seq.modules() if isinstance(m, nn.Linear)]


def extract_policy(model: Any, agent: str, spec: InstanceSpec, settings: SB3Settings, scaling: Scaling) -> LearnedPolicy:
    """The model's greedy policy as a LearnedPolicy (weights copied, SB3 no longer needed)."""
    pol = model.policy
    if agent in ("ppo", "a2c"):
        layers = _linears(pol.mlp_extractor.policy_net) + [pol.action_net]
        head = "logits"
    else:
        layers = _linears(pol.q_net.q_net)
        head = "q_values"
    net = from_linears(layers, settings.activation, head, scaling.slot_counts)
    return LearnedPolicy(spec, scaling, net, agent=agent)

