"""CLI: solve output, JSON, and bad inputs ending in one line on stderr with exit code 2."""
import json
import subprocess
import sys

import pytest

from invbench.cli import main

GOOD = """
[instance]
model = "lost_sales"
lead_time = 1
shortage_cost = 9.0
[instance.demand]
distribution = "poisson"
mean = 3.0
"""

BAD = {
    "negative lead time": ("lead_time = 1", "lead_time = -2", "instance.lead_time"),
    "string cost": ("shortage_cost = 9.0", 'shortage_cost = "nine"', "instance.shortage_cost"),
    "unknown key": ("lead_time = 1", "lead_time = 1\nreview = 2", "instance.review"),
    "bad model": ('model = "lost_sales"', 'model = "lostsales"', "instance.model"),
    "discount > 1": ("lead_time = 1", "lead_time = 1\ndiscount = 1.2", "instance.discount"),
    "case pack 0": ("lead_time = 1", "lead_time = 1\ncase_pack = 0", "instance.case_pack"),
    "negative mean": ("mean = 3.0", "mean = -3.0", "demand.mean"),
    "nan mean": ("mean = 3.0", "mean = nan", "demand.mean"),
    "nb variance": ('distribution = "poisson"\nmean = 3.0',
                    'distribution = "negative_binomial"\nmean = 3.0\nvariance = 2.0', "demand.variance"),
    "binomial p": ('distribution = "poisson"\nmean = 3.0', 'distribution = "binomial"\nn = 5\np = 1.5', "demand.p"),
    "empty data": ('distribution = "poisson"\nmean = 3.0', 'distribution = "empirical"\ncounts = []', "demand.counts"),
    "unknown distribution": ('distribution = "poisson"', 'distribution = "weibull"', "demand.distribution"),
    "broken toml": ("[instance]", "[instance", "spec file"),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_spec_exits_2_with_one_line(case, tmp_path, capsys):
    old, new, field = BAD[case]
    path = tmp_path / "bad.toml"
    path.write_text(GOOD.replace(old, new, 1))
    code = main(["solve", str(path)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and field in err, err


def test_subprocess_has_no_traceback(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(GOOD.replace("mean = 3.0", "mean = -1.0"))
    for args in (["solve", str(path)], ["solve", str(tmp_path / "missing.toml")],
                 ["evaluate", str(path), "--policy", "base_stock"], ["solve"]):
        p = subprocess.run([sys.executable, "-m", "invbench", *args], capture_output=True, text=True)
        assert p.returncode == 2, (args, p.stderr)
        assert "Traceback" not in p.stderr and len(p.stderr.strip().splitlines()) == 1, p.stderr


def test_solve_json_and_text(tmp_path, capsys):
    path = tmp_path / "good.toml"
    path.write_text(GOOD)
    assert main(["solve", str(path), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["lower"] <= d["cost"] <= d["upper"] and d["instance"]["lead_time"] == 1
    assert main(["solve", str(path)]) == 0
    out = capsys.readouterr().out
    assert "certified bounds" in out and "optimal order" in out


def test_solve_refuses_over_budget_with_estimate(tmp_path, capsys):
    path = tmp_path / "big.toml"
    path.write_text(GOOD.replace("lead_time = 1", "lead_time = 4"))
    assert main(["solve", str(path), "--max-states", "1000"]) == 2
    err = capsys.readouterr().err
    assert "states" in err and "MiB" in err and "budget" in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("args", [["policies"], ["solve", "--help"]])
def test_reader_closing_the_pipe_ends_quietly(args):
    # `invbench ... | head`: the reader goes away before the output is written. Unix tools stop
    # quietly with status 128 + SIGPIPE (common practice); no traceback reaches the terminal.
    p = subprocess.Popen([sys.executable, "-m", "invbench", *args], stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE)
    p.stdout.close()
    err = p.stderr.read().decode()
    code = p.wait(timeout=120)
    p.stderr.close()
    assert "Traceback" not in err and "BrokenPipe" not in err, err
    assert code in (0, 141), (code, err)
