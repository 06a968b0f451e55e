"""The `invbench fit` quick example in README.md runs as written, from sales to policy."""
import shlex
from pathlib import Path

from invbench.cli import main
from invbench.envs.spec import load_spec

ROOT = Path(__file__).resolve().parents[1]


def test_readme_fit_example_runs_as_written(tmp_path, monkeypatch, capsys):
    text = (ROOT / "README.md").read_text()
    section = text[text.index("**Quick example** on invented data"):]
    section = section[:section.index("\n## ")]
    commands = [shlex.split(line.strip()) for line in section.splitlines() if line.startswith("    invbench ")]
    assert [c[1] for c in commands] == ["fit", "solve", "evaluate"]
    (tmp_path / "fitting").symlink_to(ROOT / "fitting")  # the example runs from the repository root
    monkeypatch.chdir(tmp_path)
    for cmd in commands:
        assert main(cmd[1:]) == 0, (cmd, capsys.readouterr().err)
    out = capsys.readouterr().out
    assert "brake-pads-disc" in out and "gap to optimum" in out
    assert len(list((tmp_path / "items").glob("*.toml"))) == 30
    spec = load_spec(tmp_path / "items" / "brake-pads-disc.toml")
    assert spec.demand.distribution == "negative_binomial"
    assert abs(spec.demand.mean - 3.02) < 0.005  # the figures the README quotes
