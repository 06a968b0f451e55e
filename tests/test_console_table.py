"""The end-of-run console table: one block per instance, parameters as key=value, gaps in %."""
import pandas as pd

from invbench.experiments.console_table import format_tables


def test_tables_per_instance():
    df = pd.DataFrame([
        {"instance": "a", "policy": "optimum", "params": "{}", "cost": 5.0, "ci_halfwidth": 0.0, "gap": 0.0,
         "method": "exact", "status": "ok"},
        {"instance": "a", "policy": "base_stock", "params": '{"S": 15}', "cost": 5.5, "ci_halfwidth": 0.0,
         "gap": 0.1, "method": "exact", "status": "ok"},
        {"instance": "b", "policy": "myopic", "params": "{}", "cost": 7.0, "ci_halfwidth": 0.25, "gap": -1e-9,
         "method": "simulated", "status": "ok"},
    ])
    text = "\n".join(format_tables(df))
    assert "== a" in text and "== b" in text
    assert "S=15" in text and "10.00%" in text
    assert "+-0.250" in text and "-0.00%" not in text
