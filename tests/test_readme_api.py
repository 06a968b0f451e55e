"""The Python example in README.md runs as written (on a small spec file), so the docs stay true."""
import re
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_python_example_runs(tmp_path, monkeypatch):
    text = README.read_text()
    block = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    spec_block = re.search(r"```toml\n(.*?)```", text, re.S).group(1)
    (tmp_path / "instance.toml").write_text(spec_block)
    monkeypatch.chdir(tmp_path)
    scope: dict = {}
    exec(compile(block, "README.md", "exec"), scope)
    ev, opt = scope["ev"], scope["opt"]
    assert opt.lower <= opt.cost <= opt.upper
    assert ev.gap is not None and ev.gap >= -1e-6
