"""Reports: each PNG decodes and is not blank; report.md links them; the self-contained HTML,
opened in headless Chromium (Debian's `chromium`), renders its tables and loads its images."""
from __future__ import annotations

import re
import shutil
import subprocess

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

from invbench.experiments.report import write_report
from invbench.experiments.runner import run_bench
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, search_policy, sim_policy, write_suite

EXPECTED_PNGS = {"gap.png", "gap_vs_lead_time.png", "learning_curves.png", "policy_map.png"}
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("report")
    insts = [instance(f"ls-L{L}", "lost_sales", L=L, mean=3.0) for L in (0, 1, 2)]
    insts.append(instance("bo-L1", "backorder", L=1, mean=3.0))
    pols = [{"name": "optimum"}, search_policy("search"), sim_policy("S8", 8)]
    path = write_suite(tmp / "rep.toml", insts, pols, [0], name="rep", sweep="lead_time")
    res = run_bench(load_suite(path), tmp / "out", workers=1, progress=False)
    assert not res.failed, res.failed
    return write_report(tmp / "out")


def _assert_not_blank(img: np.ndarray, what: str) -> None:
    rgb = img[..., :3].astype(float)
    if rgb.max() > 1.0:
        rgb /= 255.0
    assert rgb.std() > 0.05, f"{what}: nearly uniform image"
    ink = np.mean(rgb.min(axis=-1) < 0.9)  # share of pixels that are not (near) white
    assert ink > 0.02, f"{what}: only {ink:.1%} of pixels drawn"


def test_every_png_decodes_and_is_not_blank(report):
    assert {p.name for p in report.pngs} == EXPECTED_PNGS
    for p in report.pngs:
        img = mpimg.imread(p)
        assert img.ndim == 3 and img.shape[0] >= 300 and img.shape[1] >= 500, (p.name, img.shape)
        _assert_not_blank(img, p.name)


def test_markdown_links_the_figures_and_holds_the_tables(report):
    md = report.md.read_text()
    linked = set(re.findall(r"\]\(([^)]+\.png)\)", md))
    assert linked == EXPECTED_PNGS
    assert "| policy | parameters | seed | cost per period |" in md
    for name in ("ls-L0", "ls-L1", "ls-L2", "bo-L1"):
        assert f"### {name}" in md
    # the gap shown for each row is (cost - optimum) / optimum of that instance's optimum cell
    df = pd.read_csv(report.md.parent / "results.csv")
    r = df[(df["instance"] == "ls-L1") & (df["policy"] == "S8")].iloc[0]
    opt = df[(df["instance"] == "ls-L1") & (df["kind"] == "optimum")]["cost"].iloc[0]
    assert f"{100 * (r.cost - opt) / opt:.3f}%" in md


def _chromium() -> str:
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        pytest.fail("headless Chromium is needed for this test: apt-get install -y chromium "
                    "(make test installs it when missing and it can)")
    return exe


def test_html_renders_tables_and_images_in_headless_chromium(report, tmp_path):
    exe = _chromium()
    url = report.html.resolve().as_uri()
    flags = CHROMIUM_FLAGS + [f"--user-data-dir={tmp_path / 'profile'}"]
    dom = subprocess.run([exe, *flags, "--dump-dom", url], capture_output=True, text=True, timeout=120)
    assert dom.returncode == 0, dom.stderr[-2000:]
    html = dom.stdout
    # the page's own load handler counts images that decoded (naturalWidth > 0)
    assert 'data-images-loaded="4/4"' in html, re.findall(r"data-images-loaded=\"[^\"]*\"", html)
    assert len(re.findall(r'<img src="data:image/png;base64,', html)) == 4
    assert html.count("<table>") >= 1 + 4  # summary + one per instance
    assert "<td>ls-L2</td>" in html or "<h3>ls-L2</h3>" in html
    assert "src=\"http" not in html and "href=\"http" not in html  # self-contained
    shot = tmp_path / "shot.png"
    run = subprocess.run([exe, *flags, f"--screenshot={shot}", "--window-size=1280,2200", url],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
    _assert_not_blank(mpimg.imread(shot), "screenshot")


def test_report_command_line(report, capsys):
    from invbench.cli import main

    assert main(["report", str(report.md.parent)]) == 0
    printed = capsys.readouterr().out.split()
    assert any(p.endswith("report.html") for p in printed)
    assert main(["report", str(report.md.parent / "nowhere")]) == 2
    assert "no suite.toml" in capsys.readouterr().err
