"""`invbench fit` on the command line: good runs (files, table, JSON) and every kind of bad input
ending in one line on stderr that names the column or option, exit code 2, no traceback, and no
file written."""
import json
import os
import subprocess
import sys

import numpy as np
import pytest

from invbench.cli import main
from invbench.envs.spec import load_spec

rng = np.random.default_rng(0)
_ROWS = [(f"2024-01-{d:02d}", item, int(rng.poisson(m)), int(rng.random() < 0.1))
         for d in range(1, 32) for item, m in (("brake pads", 3.0), ("chain lube", 5.0))]
GOOD = "date,item,units,stockout\n" + "".join(f"{a},{b},{c},{s}\n" for a, b, c, s in _ROWS)


def write(tmp_path, text, name="sales.csv"):
    p = tmp_path / name
    p.write_bytes(text if isinstance(text, bytes) else text.encode())
    return p


def run(args, capsys):
    try:
        code = main(args)
    except SystemExit as e:  # argparse's own errors (one line, exit 2) end this way
        code = e.code
    out = capsys.readouterr()
    return code, out.out, out.err.strip()


def test_good_run_writes_loadable_instances_and_summary(tmp_path, capsys):
    sales = write(tmp_path, GOOD)
    out = tmp_path / "items"
    code, stdout, err = run(["fit", str(sales), "--out", str(out), "--lead-time", "2", "--shortage-cost", "5"], capsys)
    assert code == 0, err
    files = sorted(p.name for p in out.iterdir())
    assert files == ["brake_pads.toml", "chain_lube.toml", "fit_summary.csv"]
    spec = load_spec(out / "brake_pads.toml")
    assert spec.name == "brake pads" and spec.lead_time == 2 and spec.shortage_cost == 5.0
    assert spec.model == "lost_sales"
    assert "brake pads" in stdout and "chain lube" in stdout
    assert (out / "brake_pads.toml").stat().st_mode & 0o777 == 0o666 & ~_umask()
    header = (out / "fit_summary.csv").read_text().splitlines()[0]
    assert header.startswith("item,file,days,censored_days,censored_share")


def _umask():
    m = os.umask(0)
    os.umask(m)
    return m


def test_json_has_name_choice_and_mean_matching_the_files(tmp_path, capsys):
    sales = write(tmp_path, GOOD)
    code, stdout, err = run(["fit", str(sales), "--out", str(tmp_path / "o"), "--json"], capsys)
    assert code == 0, err
    d = json.loads(stdout)
    assert [i["item"] for i in d["items"]] == ["brake pads", "chain lube"]
    for item in d["items"]:
        spec = load_spec(item["file"])
        assert spec.demand.distribution == {"poisson": "poisson", "negative_binomial": "negative_binomial",
                                            "kaplan_meier": "empirical"}[item["chosen"]]
        assert spec.demand.mean == pytest.approx(item["mean"], rel=1e-6)


def test_items_file_sets_each_item(tmp_path, capsys):
    sales = write(tmp_path, GOOD)
    items = write(tmp_path, "item,model,lead_time,holding_cost\nbrake pads,backorder,3,0.5\nchain lube,,1,\n",
                  "items.csv")
    code, _, err = run(["fit", str(sales), "--items", str(items), "--out", str(tmp_path / "o"),
                        "--holding-cost", "2"], capsys)
    assert code == 0, err
    a, b = load_spec(tmp_path / "o" / "brake_pads.toml"), load_spec(tmp_path / "o" / "chain_lube.toml")
    assert (a.model, a.lead_time, a.holding_cost) == ("backorder", 3, 0.5)
    assert (b.model, b.lead_time, b.holding_cost) == ("lost_sales", 1, 2.0)  # empty cells take the options


def test_existing_files_are_kept_unless_overwrite(tmp_path, capsys):
    sales = write(tmp_path, GOOD)
    out = tmp_path / "o"
    out.mkdir()
    (out / "chain_lube.toml").write_text("keep me")
    code, _, err = run(["fit", str(sales), "--out", str(out)], capsys)
    assert code == 2 and "--overwrite" in err and len(err.splitlines()) == 1
    assert (out / "chain_lube.toml").read_text() == "keep me"
    assert not (out / "brake_pads.toml").exists()  # checked before any work started
    code, _, err = run(["fit", str(sales), "--out", str(out), "--overwrite"], capsys)
    assert code == 0, err
    assert load_spec(out / "chain_lube.toml").name == "chain lube"


def test_missing_stockout_column_is_a_note(tmp_path, capsys):
    text = "\n".join(",".join(line.split(",")[:3]) for line in GOOD.splitlines()) + "\n"
    sales = write(tmp_path, text)
    code, stdout, err = run(["fit", str(sales), "--out", str(tmp_path / "o")], capsys)
    assert code == 0, err
    assert "note: no 'stockout' column" in stdout


def plus(*rows):
    return GOOD + "".join(r + "\n" for r in rows)


BAD_SALES = {
    "missing units column": (GOOD.replace("date,item,units,stockout", "date,item,sold,stockout", 1), "'units'"),
    "non-numeric units": (plus("2024-02-01,bell,three,0"), "'units'"),
    "negative units": (plus("2024-02-01,bell,-2,0"), "'units'"),
    "fractional units": (plus("2024-02-01,bell,1.5,0"), "'units'"),
    "empty units": (plus("2024-02-01,bell,,0"), "'units'"),
    "infinite units": (plus("2024-02-01,bell,inf,0"), "'units'"),
    "units too large": (plus("2024-02-01,bell,100001,0"), "'units'"),
    "bad date": (plus("2024-13-02,bell,1,0"), "'date'"),
    "date in another format": (plus("02/01/2024,bell,1,0"), "'date'"),
    "stockout 2": (plus("2024-02-01,bell,1,2"), "'stockout'"),
    "stockout yes": (plus("2024-02-01,bell,1,yes"), "'stockout'"),
    "empty stockout": (plus("2024-02-01,bell,1,"), "'stockout'"),
    "empty item": (plus("2024-02-01,,1,0"), "'item'"),
    "duplicate day": (plus("2024-01-05,chain lube,3,0"), "second row"),
    "header only": ("date,item,units,stockout\n", "no data rows"),
    "empty file": ("", "empty"),
    "ragged row": (plus("2024-02-01,bell,1,0,7,8"), "not a valid CSV"),
    "not utf-8": (GOOD.encode() + "2024-02-01,sch\u00e4del,1,0\n".encode("latin-1"), "UTF-8"),
    "binary": (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary"),
    "all days stock-out": (plus(*(f"2024-02-{d:02d},bell,1,1" for d in range(1, 4))), "'stockout'"),
}


@pytest.mark.parametrize("case", list(BAD_SALES), ids=list(BAD_SALES))
def test_bad_sales_file_one_line_exit_2_nothing_written(case, tmp_path, capsys):
    text, field = BAD_SALES[case]
    sales = write(tmp_path, text)
    out = tmp_path / "o"
    code, _, err = run(["fit", str(sales), "--out", str(out)], capsys)
    assert code == 2, err
    assert len(err.splitlines()) == 1 and field in err, err
    assert not out.exists()


def test_the_message_names_the_line(tmp_path, capsys):
    sales = write(tmp_path, plus("2024-02-01,bell,2,0", "2024-02-02,bell,x,0"))
    code, _, err = run(["fit", str(sales), "--out", str(tmp_path / "o")], capsys)
    line = len(GOOD.splitlines()) + 2
    assert code == 2 and f"line {line}:" in err and "whole number" in err, err


def _items(tmp_path, text):
    return str(write(tmp_path, text, "items.csv"))


BAD_OPTIONS = {
    "missing file": (lambda t: ["fit", str(t / "nope.csv")], "does not exist"),
    "out is a file": (lambda t: ["fit", "SALES", "--out", str(write(t, "x", "f.txt"))], "--out"),
    "out under a file": (lambda t: ["fit", "SALES", "--out", str(write(t, "x", "f.txt") / "sub")], "--out"),
    "unwritable out": (lambda t: ["fit", "SALES", "--out", "/proc/invbench-fit-test"], "--out"),
    "negative lead time": (lambda t: ["fit", "SALES", "--lead-time", "-1"], "--lead-time"),
    "bad model": (lambda t: ["fit", "SALES", "--model", "lost"], "--model"),
    "negative holding cost": (lambda t: ["fit", "SALES", "--holding-cost", "-1"], "--holding-cost"),
    "renamed column missing": (lambda t: ["fit", "SALES", "--units-col", "qty"], "'qty'"),
    "stockout column asked, missing": (lambda t: ["fit", "SALES", "--stockout-col", "out"], "'out'"),
    "items missing row": (lambda t: ["fit", "SALES", "--items", _items(t, "item\nbrake pads\n")], "chain lube"),
    "items bad lead time": (lambda t: ["fit", "SALES", "--items", _items(
        t, "item,lead_time\nbrake pads,1.5\nchain lube,1\n")], "'lead_time', line 2"),
    "items text cost": (lambda t: ["fit", "SALES", "--items", _items(
        t, "item,holding_cost\nbrake pads,cheap\nchain lube,1\n")], "'holding_cost'"),
    "items unknown column": (lambda t: ["fit", "SALES", "--items", _items(t, "item,colour\nbrake pads,red\n")],
                             "'colour'"),
    "items duplicate": (lambda t: ["fit", "SALES", "--items", _items(
        t, "item\nbrake pads\nbrake pads\nchain lube\n")], "twice"),
    "summary is a folder": (lambda t: ["fit", "SALES", "--summary", str(t)], "--summary"),
    "bad family": (lambda t: ["fit", "SALES", "--family", "weibull"], "--family"),
}


@pytest.mark.parametrize("case", list(BAD_OPTIONS), ids=list(BAD_OPTIONS))
def test_bad_options_one_line_exit_2(case, tmp_path, capsys):
    make, field = BAD_OPTIONS[case]
    sales = str(write(tmp_path, GOOD))
    args = [sales if a == "SALES" else a for a in make(tmp_path)]
    if "--out" not in args:
        args += ["--out", str(tmp_path / "o")]
    code, _, err = run(args, capsys)
    assert code == 2, err
    assert len(err.splitlines()) == 1 and field in err, err
    assert not (tmp_path / "o").exists()


def test_item_names_that_collide_as_file_names(tmp_path, capsys):
    sales = write(tmp_path, GOOD + "2024-02-01,Brake Pads,1,0\n")
    code, _, err = run(["fit", str(sales), "--out", str(tmp_path / "o")], capsys)
    assert code == 2 and "brake_pads.toml" in err and len(err.splitlines()) == 1, err


def test_subprocess_has_no_traceback(tmp_path):
    bad = write(tmp_path, plus("2024-02-01,bell,x,0"))
    binary = write(tmp_path, b"\x00\x01\x02", "bin.csv")
    for args in (["fit", str(bad)], ["fit", str(binary)], ["fit", str(tmp_path / "missing.csv")], ["fit"]):
        p = subprocess.run([sys.executable, "-m", "invbench", *args, "--out", str(tmp_path / "o")],
                           capture_output=True, text=True, cwd=tmp_path)
        assert p.returncode == 2, (args, p.stderr)
        assert "Traceback" not in p.stderr and len(p.stderr.strip().splitlines()) == 1, p.stderr
