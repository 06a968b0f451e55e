"""Bad input to `bench`, `report` and `bench-compare`: exit code 2, exactly one line on stderr
naming the field, no traceback -- and nothing started (no results folder, no cell run).

Each case runs the real command line in a child process, as a user would.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, sim_policy, subprocess_env, write_suite

GOOD_SUITE = """[suite]
name = "ok"
[[instances]]
name = "a"
model = "backorder"
demand = { distribution = "poisson", mean = 3.0 }
[[policies]]
name = "optimum"
"""


def _suite(extra: str = "", head: str = 'name = "ok"', policies: str = '[[policies]]\nname = "optimum"\n') -> str:
    return (f"[suite]\n{head}\n{extra}\n[[instances]]\nname = \"a\"\nmodel = \"backorder\"\n"
            f"demand = {{ distribution = \"poisson\", mean = 3.0 }}\n{policies}")


#: (case id, file content (str or bytes), field the one line must name)
SUITE_FILES = [
    ("not-utf8", b"[suite]\nname = \"ok\xff\xfe\"\n", "suite: "),
    ("binary", bytes(range(256)) * 4, "suite: "),
    ("not-toml", "[suite\nname = ok", "suite: "),
    ("empty", "", "suite: "),
    ("name-dotdot", _suite(head='name = ".."'), "suite.name"),
    ("name-slash", _suite(head='name = "a/b"'), "suite.name"),
    ("name-space", _suite(head='name = "my suite"'), "suite.name"),
    ("unknown-policy", _suite(policies='[[policies]]\nname = "guess"\n'), "policies[0].name"),
    ("param-name", _suite(policies='[[policies]]\nname = "base_stock"\nparams = { level = 3 }\n'),
     "policies[0].params.level"),
    ("param-type", _suite(policies='[[policies]]\nname = "base_stock"\nparams = { S = "ten" }\n'),
     "policies[0].params.S"),
    ("param-range", _suite(policies='[[policies]]\nname = "s_S"\nparams = { s = 4, S = -1 }\n'),
     "policies[0].params."),
    ("unknown-agent", _suite(policies='[[policies]]\nagent = "sarsa"\nsteps = 10\n'), "policies[0].agent"),
    ("agent-setting", _suite(policies='[[policies]]\nagent = "ppo"\nsteps = 10\nsettings = { colour = 1 }\n'),
     "policies[0].settings.colour"),
    ("agent-setting-range", _suite(policies='[[policies]]\nagent = "ppo"\nsteps = 10\nsettings = { gamma = 2.0 }\n'),
     "policies[0].settings.gamma"),
    ("agent-steps", _suite(policies='[[policies]]\nagent = "ppo"\nsteps = 0\n'), "policies[0].steps"),
    ("cpu-nan", _suite(policies='[[policies]]\nagent = "ppo"\nsteps = 10\ncpu_seconds = nan\n'),
     "policies[0].cpu_seconds"),
    ("cpu-inf", _suite(policies='[[policies]]\nagent = "ppo"\nsteps = 10\ncpu_seconds = inf\n'),
     "policies[0].cpu_seconds"),
    ("eval-method", _suite(extra='[evaluation]\nmethod = "guess"'), "evaluation.method"),
    ("eval-replications", _suite(extra='[evaluation]\nreplications = 1'), "evaluation.replications"),
    ("eval-float", _suite(extra='[evaluation]\nperiods = nan'), "evaluation.periods"),
    ("seeds-neg", _suite(head='name = "ok"\nseeds = [-1]'), "suite.seeds"),
    ("instance-field", GOOD_SUITE.replace('mean = 3.0', 'mean = -3.0'), "instances[0]: demand.mean"),
    ("instance-nan", GOOD_SUITE.replace('mean = 3.0', 'mean = nan'), "instances[0]: demand.mean"),
    ("custom-function", _suite(policies='[[policies]]\nfunction = "not a function"\n'), "policies[0].function"),
    ("kind-key", _suite(policies='[[policies]]\nname = "base_stock"\nsteps = 5\n'), "policies[0].steps"),
]

#: (case id, CSV/Parquet content, field the one line must name) for `bench-compare DIR REF`
RESULT_FILES = [
    ("empty", b"", "reference: "),
    ("binary", bytes(range(256)) * 8, "reference: "),
    ("not-utf8", b"instance,policy,seed\n\xff\xfe,x,1\n", "reference: "),
    ("wrong-columns", b"a,b,c\n1,2,3\n", "reference."),
    ("header-only", b"instance,policy,seed,method,cost,ci_halfwidth\n", "reference: no rows"),
    ("cost-text", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0,exact,cheap,0\n", "reference.cost"),
    ("cost-inf", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0,exact,inf,0\n", "reference.cost"),
    ("seed-float", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0.5,exact,1.0,0\n", "reference.seed"),
    ("ci-negative", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0,simulated,1.0,-2\n",
     "reference.ci_halfwidth"),
    ("duplicate", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0,exact,1,0\na,p,0,exact,2,0\n",
     "reference: cell (a, p, seed 0) appears twice"),
    ("ragged", b"instance,policy,seed,method,cost,ci_halfwidth\na,p,0,exact,1,0,7,8\n", "reference: "),
    ("corrupt-parquet", b"PAR1" + bytes(100) + b"PAR1", "reference: "),
]


def _run(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "invbench", *args], cwd=cwd, env=subprocess_env(),
                          capture_output=True, text=True, timeout=300)


def _assert_refused(run: subprocess.CompletedProcess, field: str) -> None:
    lines = run.stderr.splitlines()
    assert run.returncode == 2, (run.returncode, run.stderr[-2000:])
    assert len(lines) == 1, run.stderr
    assert "Traceback" not in run.stderr
    assert lines[0].startswith("invbench: error: ") and field in lines[0], lines[0]


@pytest.fixture(scope="module")
def results_dir(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("bad")
    path = write_suite(tmp / "s.toml", [instance("a")], [{"name": "optimum"}, sim_policy("S8", 8)], [0], name="s")
    run_bench(load_suite(path), tmp / "run", workers=1, progress=False)
    return tmp / "run"


@pytest.mark.parametrize("case, content, field", SUITE_FILES, ids=[c[0] for c in SUITE_FILES])
def test_malformed_suite_file(tmp_path, case, content, field):
    path = tmp_path / f"{case}.toml"
    path.write_bytes(content if isinstance(content, bytes) else content.encode())
    _assert_refused(_run(["bench", str(path), "--out", str(tmp_path / "out")], tmp_path), field)
    assert not (tmp_path / "out").exists()  # refused before anything was started


@pytest.mark.parametrize("case, content, field", RESULT_FILES, ids=[c[0] for c in RESULT_FILES])
def test_malformed_reference_file(results_dir, tmp_path, case, content, field):
    ref = tmp_path / ("ref.parquet" if case.endswith("parquet") else "ref.csv")
    ref.write_bytes(content)
    _assert_refused(_run(["bench-compare", str(results_dir), str(ref)], tmp_path), field)


def test_wrong_typed_parquet_is_refused(results_dir, tmp_path):
    df = pd.read_csv(results_dir / "results.csv")
    df["cost"] = "cheap"
    df.to_parquet(tmp_path / "ref.parquet", index=False)
    _assert_refused(_run(["bench-compare", str(results_dir), str(tmp_path / "ref.parquet")], tmp_path),
                    "reference.cost")


def _good_suite(tmp_path: Path) -> Path:
    p = tmp_path / "good.toml"
    p.write_text(GOOD_SUITE)
    return p


@pytest.mark.parametrize("case", ["out-is-file", "out-under-file", "out-unwritable", "cells-is-file"])
def test_bad_out_paths_are_refused_before_work(tmp_path, case):
    suite = _good_suite(tmp_path)
    (tmp_path / "afile").write_text("x")
    out = {"out-is-file": tmp_path / "afile", "out-under-file": tmp_path / "afile" / "run",
           "out-unwritable": Path("/proc/invbench-no-such-place/run"), "cells-is-file": tmp_path / "run"}[case]
    if case == "cells-is-file":
        out.mkdir()
        (out / "cells").write_text("x")
    _assert_refused(_run(["bench", str(suite), "--out", str(out)], tmp_path), "--out: ")
    assert (tmp_path / "afile").read_text() == "x"


@pytest.mark.parametrize("args, field", [
    (["--workers", "nan"], "--workers: must be an integer in [1, "),
    (["--workers", "inf"], "--workers: must be an integer in [1, "),
    (["--workers", "1.5"], "--workers: must be an integer in [1, "),
    (["--workers", "-2"], "--workers: must be an integer in [1, "),
    (["--address", "h:1"], "--address: only used with --backend ray"),
])
def test_bad_bench_options(tmp_path, args, field):
    _assert_refused(_run(["bench", str(_good_suite(tmp_path)), "--out", str(tmp_path / "o"), *args], tmp_path), field)
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("value", ["nan", "inf", "-1", "0", "abc"])
def test_bad_rtol_is_refused(results_dir, tmp_path, value):
    ref = results_dir / "results.csv"
    _assert_refused(_run(["bench-compare", str(results_dir), str(ref), "--rtol-exact", value], tmp_path),
                    "--rtol-exact: must be a finite number in (0, 1]")


def test_update_onto_a_folder_or_non_csv_is_refused(results_dir, tmp_path):
    (tmp_path / "folder").mkdir()
    _assert_refused(_run(["bench-compare", str(results_dir), str(tmp_path / "folder"), "--update"], tmp_path),
                    "reference: ")
    _assert_refused(_run(["bench-compare", str(results_dir), str(tmp_path / "ref.parquet"), "--update"], tmp_path),
                    "reference: must end in .csv")
    (tmp_path / "afile").write_text("x")
    _assert_refused(_run(["bench-compare", str(results_dir), str(tmp_path / "afile" / "r.csv"), "--update"],
                         tmp_path), "reference: ")
    assert list((tmp_path / "folder").iterdir()) == []


def test_report_output_in_the_way_is_refused(results_dir, tmp_path):
    import shutil

    copy = tmp_path / "run"
    shutil.copytree(results_dir, copy)
    (copy / "report.html").mkdir()
    _assert_refused(_run(["report", str(copy)], tmp_path), "dir: ")
    assert not (copy / "report.md").exists()


def test_suite_name_dotdot_cannot_escape_runs(tmp_path):
    # `bench ..` must not be taken as a packaged suite, and a suite named ".." must not turn the
    # default results folder runs/.. into the current folder
    _assert_refused(_run(["bench", ".."], tmp_path), "suite: ")
    _assert_refused(_run(["bench", "../suites/quick"], tmp_path), "suite: ")
