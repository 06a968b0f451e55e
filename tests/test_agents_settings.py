"""Agent settings: validation, overrides from --set and the TOML [agent] table, CLI exit codes."""
from __future__ import annotations

import pytest

from invbench.agents.settings import agent_table, parse_set, sb3_settings
from invbench.agents.training import resolve_settings
from invbench.cli import main
from invbench.envs.errors import SpecError

SPEC = """
[instance]
model = "lost_sales"
lead_time = 1
shortage_cost = 4.0
demand = { distribution = "poisson", mean = 5 }
"""


def test_agent_defaults_and_overrides():
    s = sb3_settings("ppo", {"learning_rate": "1e-3", "hidden": "32,16", "progress": "false"})
    assert s.learning_rate == pytest.approx(1e-3)
    assert s.hidden == (32, 16)
    assert s.progress is False
    assert s.n_steps == 64  # the ppo default for an `auto` field
    assert sb3_settings("dqn").activation == "relu"


@pytest.mark.parametrize("agent, key, value, fragment", [
    ("ppo", "learning_rate", -1, "agent.learning_rate: must be in (0, 1]"),
    ("ppo", "hidden", "64,x", "agent.hidden: must be an integer"),
    ("ppo", "activation", "gelu", "agent.activation: must be one of tanh, relu"),
    ("ppo", "buffer_size", 10, "agent.buffer_size: not used by agent 'ppo'"),
    ("dqn", "n_epochs", 3, "agent.n_epochs: not used by agent 'dqn'"),
    ("ppo", "no_such_key", 1, "agent.no_such_key: unknown setting"),
    ("rollout", "rollouts", 0, "agent.rollouts: must be in [1, 100000]"),
    ("rollout", "fit", "guess", "agent.fit: must be one of classify, regress"),
])
def test_bad_settings_give_one_line_errors(agent, key, value, fragment):
    with pytest.raises(SpecError) as e:
        resolve_settings(agent, {key: value})
    assert fragment in str(e.value)
    assert "\n" not in str(e.value)


def test_parse_set_and_agent_table(tmp_path):
    assert parse_set(["agent.gamma=0.9", "hidden = 8,8"]) == {"gamma": "0.9", "hidden": "8,8"}
    with pytest.raises(SpecError, match="--set: must look like key=value"):
        parse_set(["gamma"])
    p = tmp_path / "spec.toml"
    p.write_text(SPEC + '\n[agent]\nname = "a2c"\nlearning_rate = 0.002\n')
    assert agent_table(p) == {"name": "a2c", "learning_rate": 0.002}


@pytest.mark.parametrize("args, fragment", [
    (["--set", "learning_rate=-1"], "agent.learning_rate: must be in (0, 1]"),
    (["--agent", "sarsa"], "agent: must be one of ppo, a2c, dqn, rollout"),
    (["--steps", "0"], "argument --steps: must be an integer >= 1"),
    (["--set", "gamma"], "--set: must look like key=value"),
])
def test_cli_bad_settings_exit_2(tmp_path, capsys, args, fragment):
    p = tmp_path / "spec.toml"
    p.write_text(SPEC)
    assert main(["train", str(p), *args]) == 2
    err = capsys.readouterr().err.strip()
    assert fragment in err and len(err.splitlines()) == 1


def test_cli_agent_table_error_exit_2(tmp_path, capsys):
    # a bad value in the spec file's [agent] table is caught like one on the command line
    p = tmp_path / "spec.toml"
    p.write_text(SPEC + "\n[agent]\nent_coef = 2.0\n")
    assert main(["train", str(p)]) == 2
    assert "agent.ent_coef: must be in [0, 1]" in capsys.readouterr().err


def test_list_settings_shows_the_agents_own_defaults_and_only_its_settings(tmp_path, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)

    def listed(agent: str) -> dict[str, str]:
        assert main(["train", str(spec), "--agent", agent, "--list-settings"]) == 0
        return {ln.split()[0]: ln.split()[1] for ln in capsys.readouterr().out.splitlines() if ln.strip()}

    dqn, ppo, rollout = listed("dqn"), listed("ppo"), listed("rollout")
    assert dqn["activation"] == "relu" and dqn["position_floor"] == "True" and dqn["td_loss"] == "squared"
    assert "clip_range" not in dqn and "n_epochs" not in dqn  # PPO's
    assert ppo["activation"] == "tanh" and ppo["n_steps"] == "64" and ppo["clip_range"] == "0.2"
    assert "td_loss" not in ppo and "position_floor" not in ppo
    assert "rollouts" in rollout and "td_loss" not in rollout and "position_floor" not in rollout
