"""Malformed input to `invbench solve/evaluate/train/policies`: each one ends in exit code 2 and
exactly one line on stderr naming what is wrong, never a traceback, and before any work.

Families: demand tables, spec file encoding, option values (NaN, infinity, wrong type, out of
range), impossible sizes (demand support, simulation), output paths, policy names and folders.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from invbench.cli import main

GOOD = """[instance]
model = "lost_sales"
lead_time = 1
shortage_cost = 9.0
[instance.demand]
distribution = "poisson"
mean = 3.0
"""
DEMAND = 'distribution = "poisson"\nmean = 3.0'


def _demand(text: str) -> str:
    return GOOD.replace(DEMAND, text)


# name -> (spec file text or bytes, arguments after the spec path, fragments the one line must hold)
CASES: dict[str, tuple[str | bytes, list[str], tuple[str, ...]]] = {
    # demand tables
    "distribution as a list": (_demand('distribution = ["poisson"]\nmean = 3.0'), ["solve"], ("demand.distribution",)),
    "nested pmf": (_demand('distribution = "empirical"\npmf = [[0.5], [0.5]]'), ["solve"], ("demand.pmf", "flat list")),
    "boolean counts": (_demand('distribution = "empirical"\ncounts = [true, false]'), ["solve"], ("demand.counts",)),
    "string counts": (_demand('distribution = "empirical"\ncounts = ["1", "2"]'), ["solve"], ("demand.counts",)),
    "gamma mean 1e-300": (_demand('distribution = "gamma"\nmean = 1e-300\nstd = 1.0'), ["solve"], ("demand.std", "gamma")),
    "geometric mean 1e-300": (_demand('distribution = "geometric"\nmean = 1e-300'), ["solve"], ("demand.mean", "mass")),
    "all counts zero": (_demand('distribution = "empirical"\ncounts = [0, 0, 0]'), ["solve"], ("demand.counts", "at 0")),
    "mean as text": (_demand('distribution = "poisson"\nmean = "five"'), ["solve"], ("demand.mean", "> 0")),
    # impossible demand sizes: refused with the estimate and the option that raises the limit
    "poisson mean 1e9": (_demand('distribution = "poisson"\nmean = 1e9'), ["solve"], ("demand:", "--max-demand-support")),
    "normal mean 1e8": (_demand('distribution = "normal"\nmean = 1e8\nstd = 1.0'), ["evaluate", "--policy", "base_stock"],
                        ("demand:", "values", "--max-demand-support")),
    "uniform to 1e12": (_demand('distribution = "uniform"\nlow = 0\nhigh = 1000000000000'), ["solve"],
                        ("demand:", "--max-demand-support")),
    "counts up to 1e13": (_demand('distribution = "empirical"\ncounts = [1, 1e13]'), ["solve"], ("--max-demand-support",)),
    "binomial n 1e11": (_demand('distribution = "binomial"\nn = 100000000000\np = 0.5'), ["solve"],
                        ("--max-demand-support",)),
    "support limit lowered": (GOOD, ["solve", "--max-demand-support", "5"], ("demand:", "over the limit of 5")),
    # spec file
    "not UTF-8": (GOOD.encode() + b"# caf\xe9\n", ["solve"], ("spec file", "UTF-8")),
    "not UTF-8 (train)": (GOOD.encode() + b"# caf\xe9\n", ["train"], ("spec file", "UTF-8")),
    "broken TOML": (GOOD.replace("[instance]", "[instance", 1), ["evaluate", "--policy", "base_stock"], ("spec file",)),
    # option values
    "memory cap nan": (GOOD, ["solve", "--max-memory-mb", "nan"], ("--max-memory-mb", "finite number > 0")),
    "state cap nan": (GOOD, ["solve", "--max-states", "nan"], ("--max-states", "integer >= 1")),
    "state cap zero": (GOOD, ["solve", "--max-states", "0"], ("--max-states", ">= 1")),
    "rel-tol inf": (GOOD, ["solve", "--rel-tol", "inf"], ("--rel-tol", "(0, 1)")),
    "cpu cap nan": (GOOD, ["train", "--max-cpu-seconds", "nan"], ("--max-cpu-seconds", ">= 0")),
    "steps fraction": (GOOD, ["train", "--steps", "1.5"], ("--steps", "integer >= 1")),
    "seed negative": (GOOD, ["evaluate", "--policy", "base_stock", "--seed", "-1"], ("--seed", "integer in [0,")),
    # the upper bound printed whole, not rounded by a float format (4.29497e+09)
    "seed too large": (GOOD, ["train", "--seed", "4294967296"], ("--seed", "integer in [0, 4294967295]")),
    "replications text": (GOOD, ["evaluate", "--policy", "base_stock", "--replications", "many"],
                          ("--replications", "integer >= 2")),
    "period cap inf": (GOOD, ["evaluate", "--policy", "base_stock", "--max-period-steps", "inf"], ("--max-period-steps",)),
    "setting nan": (GOOD, ["train", "--set", "threads=nan"], ("agent.threads", "in [1, 64]")),
    "setting text": (GOOD, ["train", "--set", "gamma=high"], ("agent.gamma", "number in (0, 1]")),
    "param nan": (GOOD, ["evaluate", "--policy", "base_stock", "--param", "S=NaN"], ("--param S", "finite")),
    # impossible simulations
    "periods 1e12": (GOOD, ["evaluate", "--policy", "base_stock", "--simulate", "--periods", "1e12"],
                     ("simulation:", "period-steps", "--max-period-steps")),
    "replications 1e9": (GOOD, ["evaluate", "--policy", "base_stock", "--replications", "1e9"],
                         ("simulation:", "--max-period-steps")),
    # policies
    "unknown policy name": (GOOD, ["evaluate", "--policy", "base_stok"], ("--policy", "no such name or folder")),
    "missing policy folder": (GOOD, ["evaluate", "--policy", "runs/ppo-missing"], ("--policy", "does not exist")),
    "unknown agent": (GOOD, ["train", "--agent", "sarsa"], ("agent: must be one of",)),
}


def _write(tmp_path: Path, spec: str | bytes) -> Path:
    path = tmp_path / "spec.toml"
    path.write_bytes(spec if isinstance(spec, bytes) else spec.encode())
    return path


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_malformed_input_one_line_exit_2(case, tmp_path, capsys):
    spec, args, fragments = CASES[case]
    code = main([args[0], str(_write(tmp_path, spec)), *args[1:]])
    out = capsys.readouterr()
    err = out.err.strip()
    assert code == 2, (case, err)
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    for f in fragments:
        assert f in err, (f, err)
    assert out.out == ""  # refused before any result was printed


@pytest.mark.parametrize("where", ["existing file", "under a file"])
def test_train_output_checked_before_training(where, tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(GOOD)
    blocker = tmp_path / "taken"
    blocker.write_text("not a folder")
    out = blocker if where == "existing file" else blocker / "run"
    code = main(["train", str(spec), "--steps", "1", "--out", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "--out" in err, err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["spec.toml", "taken"]  # nothing trained or written


def test_policy_given_as_a_file(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(GOOD)
    assert main(["evaluate", str(spec), "--policy", str(spec)]) == 2
    err = capsys.readouterr().err.strip()
    assert "--policy" in err and "is a file" in err and len(err.splitlines()) == 1


@pytest.mark.parametrize("args", [["policies", "--bogus"], ["policies", "extra"], ["solve"], ["nosuchcommand"]])
def test_bad_command_lines(args, capsys):
    assert main(args) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "error" in err


SUBPROCESS = ["poisson mean 1e9", "not UTF-8", "memory cap nan", "periods 1e12", "missing policy folder", "steps fraction"]


@pytest.mark.parametrize("case", SUBPROCESS)
def test_malformed_input_as_a_process(case, tmp_path):
    spec, args, fragments = CASES[case]
    path = _write(tmp_path, spec)
    p = subprocess.run([sys.executable, "-m", "invbench", args[0], str(path), *args[1:]], capture_output=True,
                       text=True, timeout=120)
    assert p.returncode == 2, p.stderr
    assert "Traceback" not in p.stderr and len(p.stderr.strip().splitlines()) == 1, p.stderr
    assert all(f in p.stderr for f in fragments), p.stderr


def test_trained_policy_matched_by_content_with_an_explicit_override(tmp_path, capsys):
    from invbench.agents.learned_policy import LearnedPolicy
    from invbench.agents.network import PolicyNet, architecture
    from invbench.agents.scaling import Scaling
    from invbench.envs.spec import load_spec
    spec = load_spec(_write(tmp_path, GOOD))
    scaling = Scaling(obs_scale=3.0, obs_shift=1.0, reward_offset=5.0, reward_scale=5.0, case_pack=1,
                      max_order_units=10, obs_clip=10.0, position_cap=20)
    folder = LearnedPolicy(spec.with_(name="trained-here"), scaling,
                           PolicyNet(architecture(1, (8,), 11, "tanh", "logits"))).save(tmp_path / "pol")
    args = ["evaluate", str(tmp_path / "spec.toml"), "--policy", str(folder), "--exact"]
    assert main(args) == 0  # same content, other name (the spec file has none)
    capsys.readouterr()
    (tmp_path / "spec.toml").write_text(GOOD.replace("shortage_cost = 9.0", "shortage_cost = 19.0"))
    assert main(args) == 2
    err = capsys.readouterr().err.strip()
    assert "shortage_cost = 9.0 there, 19.0 here" in err and "--allow-other-instance" in err, err
    assert main([*args, "--allow-other-instance"]) == 0
    assert "cost per period" in capsys.readouterr().out
