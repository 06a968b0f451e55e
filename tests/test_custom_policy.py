"""User policies on the command line: the README example runs as written, `--policy
module:callable` is found from the current folder, and every bad input is one line, exit 2."""
from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest

from invbench.cli import main

README = Path(__file__).resolve().parents[1] / "README.md"
INSTANCE = ('[instance]\nname = "ls"\nmodel = "lost_sales"\nlead_time = 2\nshortage_cost = 9.0\n'
            '[instance.demand]\ndistribution = "poisson"\nmean = 4.0\n')


def readme_example() -> str:
    """The policy file shown in the README (the block after the `example: my_policy.py` marker)."""
    text = README.read_text(encoding="utf-8")
    m = re.search(r"<!-- example: my_policy\.py[^>]*-->\s*```python\n(.*?)```", text, re.S)
    assert m, "README lost its example policy block"
    return m.group(1)


@pytest.fixture()
def folder(tmp_path, monkeypatch):
    """A working folder holding the README's policy file and an instance; not on sys.path."""
    (tmp_path / "my_policy.py").write_text(readme_example())
    (tmp_path / "inst.toml").write_text(INSTANCE)
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(sys, "path", [p for p in sys.path if p not in ("", ".", str(tmp_path))])
    sys.modules.pop("my_policy", None)
    yield tmp_path
    sys.modules.pop("my_policy", None)


def test_readme_example_is_ten_lines_of_code():
    code = [ln for ln in readme_example().splitlines() if ln.strip() and not ln.lstrip().startswith(('"""', "#"))]
    assert len(code) <= 10


def test_readme_example_with_given_S_matches_base_stock(folder, capsys):
    # Reference: the built-in base_stock policy with the same S (outside the custom-policy code).
    assert main(["evaluate", "inst.toml", "--policy", "my_policy:order_up_to", "--param", "S=12", "--exact"]) == 0
    mine = capsys.readouterr().out
    assert main(["evaluate", "inst.toml", "--policy", "base_stock", "--param", "S=12", "--exact"]) == 0
    ref = capsys.readouterr().out
    cost = re.compile(r"cost per period: ([0-9.]+)")
    assert cost.search(mine).group(1) == cost.search(ref).group(1)


def test_module_and_file_forms_from_another_working_directory(folder, tmp_path_factory, monkeypatch, capsys):
    # From the policy's own folder, as a module name (that folder is not on sys.path).
    assert main(["evaluate", "inst.toml", "--policy", "my_policy:order_up_to", "--param", "S=12", "--exact"]) == 0
    first = capsys.readouterr().out
    # From elsewhere, as a file path: the same policy.
    elsewhere = tmp_path_factory.mktemp("elsewhere")
    monkeypatch.chdir(elsewhere)
    assert main(["evaluate", str(folder / "inst.toml"), "--policy", f"{folder}/my_policy.py:order_up_to",
                 "--param", "S=12", "--exact"]) == 0
    assert capsys.readouterr().out == first
    # From elsewhere, the module name is looked up in that folder, where it is not.
    assert main(["evaluate", str(folder / "inst.toml"), "--policy", "my_policy:order_up_to", "--exact"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--policy" in err and "my_policy" in err


BAD = [
    ("nosuch_mod:fn", None, "not found"),
    ("my_policy:missing", None, "has no 'missing'"),
    ("bad:two_args", "def two_args(spec, params):\n    return None\n", "expected fn(spec, params=..."),
    ("bad:boom", "def boom(spec, params, seed, evaluation):\n    raise RuntimeError('no luck')\n", "raised RuntimeError"),
    ("bad:nothing", "def nothing(spec, params, seed, evaluation):\n    return 42\n", "expected a policy with act"),
    ("bad:broken", "import nosuch_dependency_xyz\n", "importing 'bad' failed"),
    ("bad:ranges", "def ranges(spec, params, seed, evaluation):\n    return None\nranges.parameters = {'S': (5, 1)}\n",
     "integer ranges"),
]


@pytest.mark.parametrize("ref,source,expected", BAD, ids=[b[0] for b in BAD])
def test_bad_custom_policy_is_one_line_exit_2(folder, capsys, ref, source, expected):
    if source is not None:
        (folder / "bad.py").write_text(source)
        sys.modules.pop("bad", None)
    assert main(["evaluate", "inst.toml", "--policy", ref, "--exact"]) == 2
    out, err = capsys.readouterr()
    assert err.count("\n") == 1 and err.startswith("invbench: error: --policy"), err
    assert expected in err and "Traceback" not in err


def test_save_of_a_custom_policy_is_refused_before_any_work(folder, capsys):
    assert main(["evaluate", "inst.toml", "--policy", "my_policy:order_up_to", "--save", "kept"]) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.count("\n") == 1 and "--save" in err
    assert not (folder / "kept").exists()
