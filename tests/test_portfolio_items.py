"""Reading a portfolio: items CSV, fit folder (also moved), folder of instance files; and every
bad cell refused with one line naming the column and line."""
import shutil

import pytest

from invbench.envs.errors import SpecError
from invbench.envs.spec import spec_from_dict
from invbench.portfolio.items import read_portfolio

GOOD = ("item,model,lead_time,holding_cost,shortage_cost,demand,mean,variance,pmf\n"
        "chain,lost_sales,2,1,9,poisson,3,,\n"
        "pads,backorder,1,1,4,negative_binomial,2,5,\n"
        "caps,,0,0.5,3,empirical,,,0.5 0.25 0.25\n")


def write(tmp_path, text, name="items.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_items_csv_gives_the_instances_written_out(tmp_path):
    items = read_portfolio(write(tmp_path, GOOD))
    assert [i.name for i in items] == ["chain", "pads", "caps"]
    assert items[0].spec == spec_from_dict({"name": "chain", "model": "lost_sales", "lead_time": 2, "holding_cost": 1.0,
                                            "shortage_cost": 9.0, "demand": {"distribution": "poisson", "mean": 3}})
    assert items[1].spec.demand.var == pytest.approx(5.0)
    assert items[2].spec.model == "lost_sales"  # an empty model cell takes the default
    assert items[2].spec.demand.mean == pytest.approx(0.75)


@pytest.mark.parametrize("text, words", [
    (GOOD.replace("chain,lost_sales,2,", "chain,lost_sales,-1,"), ["column 'lead_time'", "line 2", "chain"]),
    (GOOD.replace("poisson,3", "poisson,-3"), ["column 'mean'", "line 2"]),
    (GOOD.replace("poisson,3", "poison,3"), ["column 'demand'", "line 2", "poisson"]),
    (GOOD.replace("negative_binomial,2,5", "negative_binomial,2,1"), ["column 'variance'", "line 3"]),
    (GOOD.replace(",pmf\n", ",colour\n"), ["column 'colour' unknown"]),
    (GOOD + "chain,lost_sales,1,1,9,poisson,3,,\n", ["'chain' appears twice"]),
    ("item,model\nchain,lost_sales\n", ["column 'demand' missing"]),
    ("item,demand,mean\n", ["holds no items"]),
])
def test_bad_items_file_is_one_line_naming_the_column(tmp_path, text, words):
    with pytest.raises(SpecError) as e:
        read_portfolio(write(tmp_path, text))
    msg = str(e.value)
    assert "\n" not in msg
    for w in words:
        assert w in msg


def test_fit_folder_is_read_even_after_it_was_moved(tmp_path):
    from invbench.cli import main

    sales = tmp_path / "sales.csv"
    sales.write_text("date,item,units,stockout\n" + "".join(
        f"2024-01-{d:02d},{it},{(d * k) % 5},0\n" for d in range(1, 29) for it, k in (("a", 1), ("b", 3))))
    assert main(["fit", str(sales), "--out", str(tmp_path / "fit"), "--no-progress"]) == 0
    moved = tmp_path / "elsewhere"
    shutil.move(tmp_path / "fit", moved)
    items = read_portfolio(moved)  # fit_summary.csv still names the old paths
    assert [i.name for i in items] == ["a", "b"]
    assert read_portfolio(moved / "fit_summary.csv")[1].spec == items[1].spec
    (moved / "fit_summary.csv").unlink()
    assert sorted(i.name for i in read_portfolio(moved)) == ["a", "b"]  # a folder of instance files


def test_missing_source_is_one_line(tmp_path):
    with pytest.raises(SpecError, match="neither an items CSV"):
        read_portfolio(tmp_path / "nope.csv")
