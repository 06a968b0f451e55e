"""Report outputs for papers: figures also as SVG and PDF, the summary table also as LaTeX and
Markdown, chosen with `--format` (report and bench); a bad format is one line and exit code 2.

Outside checks: the SVG files parse as XML with the SVG namespace (Python's xml.etree, W3C SVG
namespace); the PDF files have the header and end-of-file marker of the PDF format (ISO 32000,
from memory); the LaTeX table is booktabs with `%` escaped (LaTeX's comment character).
"""
from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest

from invbench.cli import main
from invbench.experiments.report import write_report
from invbench.experiments.runner import run_bench
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, search_policy, sim_policy, write_suite


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("formats")
    insts = [instance(f"ls-L{L}", "lost_sales", L=L, mean=3.0) for L in (0, 1)]
    pols = [{"name": "optimum"}, search_policy("search"), sim_policy("S8", 8)]
    path = write_suite(tmp / "fmt.toml", insts, pols, [0], name="fmt", sweep="lead_time")
    res = run_bench(load_suite(path), tmp / "out", workers=1, progress=False)
    assert not res.failed, res.failed
    return tmp / "out"


def test_all_formats_write_vector_figures_and_tables(results):
    rep = write_report(results, ("svg", "pdf", "tex", "md"))
    names = {p.name for p in rep.extra}
    for png in rep.pngs:
        assert f"{png.stem}.svg" in names and f"{png.stem}.pdf" in names
    for p in rep.extra:
        data = p.read_bytes()
        if p.suffix == ".svg":
            root = ET.fromstring(data)
            assert root.tag == "{http://www.w3.org/2000/svg}svg"
            assert len(list(root.iter())) > 50  # drawn, not an empty canvas
        elif p.suffix == ".pdf":
            assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF") and len(data) > 2000
    tex = (results / "summary.tex").read_text()
    assert "\\begin{tabular}" in tex and "\\toprule" in tex and "\\bottomrule" in tex
    assert "\\%" in tex and "mean gap" in tex and "search" in tex
    assert not any(line.rstrip().endswith("%") and not line.rstrip().endswith("\\%")
                   for line in tex.splitlines() if not line.startswith("%"))
    md = (results / "summary.md").read_text()
    assert "| policy | cells | mean gap | max gap |" in md and "| search |" in md


def test_same_results_give_the_same_vector_files(results):
    first = {p.name: p.read_bytes() for p in write_report(results, ("svg", "pdf")).extra}
    second = {p.name: p.read_bytes() for p in write_report(results, ("svg", "pdf")).extra}
    assert first == second  # no creation dates inside


def test_report_command_format_option(results, capsys):
    for p in results.glob("*.svg"):
        p.unlink()
    assert main(["report", str(results), "--format", "svg,tex"]) == 0
    out = capsys.readouterr().out
    assert "gap.svg" in out and "summary.tex" in out and "gap.pdf" not in out
    assert (results / "gap.svg").is_file()
    assert main(["report", str(results), "--format", "png,docx"]) == 2
    err = capsys.readouterr().err
    assert err.strip() == ("invbench: error: --format: must be a comma-separated list of svg, pdf, tex, md "
                           "(or all), got 'png,docx'")


def test_bench_refuses_a_bad_format_before_running(tmp_path, capsys):
    path = write_suite(tmp_path / "s.toml", [instance("x", "lost_sales", L=1, mean=3.0)], [{"name": "optimum"}],
                       [0], name="s")
    assert main(["bench", str(path), "--out", str(tmp_path / "o"), "--format", "gif"]) == 2
    assert "--format: must be a comma-separated list" in capsys.readouterr().err
    assert not (tmp_path / "o" / "cells").exists()
