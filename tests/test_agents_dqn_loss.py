"""DQN's loss on the TD error: squared by default, SB3's Huber loss when asked for.

Sources: stable-baselines3's `DQN.train` computes its loss with
`torch.nn.functional.smooth_l1_loss` (the Huber loss, documented in its DQN page and source);
torch's `F.mse_loss` is the squared error. The test watches which of torch's two functions
runs during training, and that torch's module is SB3's again afterwards. The reason for the
default (least squares estimates a mean, the Huber loss leans to the median) is common practice.
"""
from __future__ import annotations

import pytest
import torch
import torch.nn.functional as F

from invbench.agents.dqn_loss import dqn_class
from invbench.agents.sb3_agents import make_model
from invbench.agents.scaling import scaling_for
from invbench.agents.settings import sb3_settings
from invbench.envs.errors import SpecError
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
SPEC = spec_from_dict({"model": "lost_sales", "lead_time": 1, "shortage_cost": 9.0,
                       "demand": {"distribution": "poisson", "mean": 3}})


def _calls_during_training(monkeypatch: pytest.MonkeyPatch, td_loss: str | None) -> dict[str, int]:
    calls = {"mse_loss": 0, "smooth_l1_loss": 0}
    for name in calls:
        real = getattr(F, name)

        def spy(*a, _real=real, _name=name, **k):
            calls[_name] += 1
            return _real(*a, **k)

        monkeypatch.setattr(F, name, spy)
    over = {"threads": 1, "progress": False, "n_envs": 4, "batch_size": 32, "learning_starts": 64,
            "train_freq": 4, "gradient_steps": 2, "curve_exact": False}
    if td_loss is not None:
        over["td_loss"] = td_loss
    s = sb3_settings("dqn", over)
    model = make_model("dqn", SPEC, s, scaling_for(SPEC, s), seed=0)
    model.learn(total_timesteps=400)
    return calls


def test_default_trains_on_the_squared_td_error(monkeypatch):
    calls = _calls_during_training(monkeypatch, None)
    assert calls["mse_loss"] > 0 and calls["smooth_l1_loss"] == 0
    from stable_baselines3.dqn import dqn as sb3_dqn
    assert sb3_dqn.F is F  # torch's module is put back after each training call


def test_huber_keeps_sb3s_own_loss(monkeypatch):
    calls = _calls_during_training(monkeypatch, "huber")
    assert calls["smooth_l1_loss"] > 0 and calls["mse_loss"] == 0


def test_an_unknown_loss_is_refused_with_the_allowed_values():
    with pytest.raises(SpecError, match=r"agent\.td_loss: must be one of squared, huber"):
        sb3_settings("dqn", {"td_loss": "absolute"})
    with pytest.raises(ValueError, match="td_loss"):
        dqn_class("absolute")
