"""The README's "Your own RL code" recipe runs as written and reaches the gap it states.

The optimum it is measured against is the exact solver's (`invbench.solve`, relative value
iteration with certified bounds), and the recipe's policy is evaluated exactly
(`invbench.evaluate`, method "exact" on the policy's reachable chain), so the gap carries no
simulation noise.
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"
SECTION = "## Your own RL code"
#: the gap the README promises for its recipe ("within 3 % of the optimum")
PROMISED_GAP = 0.03


def recipe() -> str:
    text = README.read_text(encoding="utf-8")
    assert SECTION in text, "README lost its recipe section"
    section = text.split(SECTION, 1)[1].split("\n## ", 1)[0]
    return re.search(r"```python\n(.*?)```", section, re.S).group(1)


def test_the_recipe_promises_what_this_test_checks():
    section = README.read_text(encoding="utf-8").split(SECTION, 1)[1].split("\n## ", 1)[0]
    assert f"within {round(100 * PROMISED_GAP)} %" in section


@pytest.mark.slow
def test_readme_recipe_reaches_its_gap_as_written(capsys):
    scope: dict = {}
    exec(compile(recipe(), "README.md", "exec"), scope)
    ev, opt = scope["ev"], scope["opt"]
    assert ev.method == "exact" and opt.lower <= opt.cost <= opt.upper
    assert -1e-6 <= ev.gap <= PROMISED_GAP
    assert "gap" in capsys.readouterr().out
