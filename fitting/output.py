"""Output of `invbench fit`: output paths checked up front, one instance TOML per item written
atomically and read back, the summary table (console and CSV).
"""
from __future__ import annotations

import csv
import io
import math
import os
import re
import tempfile
from pathlib import Path
from typing import Any, Mapping

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, load_spec, spec_from_dict

from .selection import ItemFit


def file_stem(item: str) -> str:
    """A safe, lower-case file name for an item: runs of other characters become '_'."""
    stem = re.sub(r"[^a-z0-9._-]+", "_", item.lower()).strip("._-")
    return stem or "item"


def _nearest_existing(p: Path) -> Path:
    p = p.absolute()
    while not p.exists() and p != p.parent:
        p = p.parent
    return p


def check_writable_dir(folder: Path, option: str) -> None:
    """The folder exists (or can be created) and a file can be written in it; creates nothing."""
    if folder.exists() and not folder.is_dir():
        raise SpecError(f"{option}: {str(folder)!r} exists and is not a folder")
    base = _nearest_existing(folder)
    if not base.is_dir():
        raise SpecError(f"{option}: cannot create {str(folder)!r}: {str(base)!r} is not a folder")
    try:
        fd, tmp = tempfile.mkstemp(dir=base, prefix=".invbench-write-check-")
        os.close(fd)
        os.unlink(tmp)
    except OSError as e:
        raise SpecError(f"{option}: {str(folder)!r} is not writable ({e.strerror})") from None


def plan_outputs(items: list[str], out_dir: str | Path, summary: str | Path | None,
                 overwrite: bool) -> tuple[dict[str, Path], Path]:
    """Instance path per item and the summary CSV path, checked before any fitting starts."""
    out = Path(out_dir)
    check_writable_dir(out, "--out")
    paths: dict[str, Path] = {}
    seen: dict[str, str] = {}
    for name in items:
        stem = file_stem(name)
        if stem in seen:
            raise SpecError(f"column 'item': items {seen[stem]!r} and {name!r} both map to the file name "
                            f"{stem}.toml; rename one of them")
        seen[stem] = name
        paths[name] = out / f"{stem}.toml"
    summary_path = Path(summary) if summary else out / "fit_summary.csv"
    if summary:
        check_writable_dir(summary_path.parent, "--summary")
    if summary_path.is_dir():
        raise SpecError(f"--summary: {str(summary_path)!r} is a folder, expected a CSV file path")
    if not overwrite:
        for p in [*paths.values(), summary_path]:
            if p.exists():
                raise SpecError(f"--out: {str(p)!r} already exists (pass --overwrite to replace the files)")
    return paths, summary_path


def atomic_write_text(path: Path, text: str) -> None:
    """Temp file in the same folder, then os.replace; permissions follow the umask (0644 usually)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; a result file is as readable as any other
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def build_instance(fit: ItemFit, settings: Mapping[str, Any]) -> InstanceSpec:
    """The instance of one item: its settings and the chosen demand law, named after the item."""
    return spec_from_dict({"name": fit.item, **settings, "demand": dict(fit.chosen_fit.demand or {})})


def write_instance(spec: InstanceSpec, path: Path) -> None:
    """Write as envs/spec.py writes it, then read it back and check it is the same instance."""
    atomic_write_text(path, spec.to_toml())
    back = load_spec(path)
    if back.to_dict() != spec.to_dict():
        raise SpecError(f"--out: {str(path)!r} did not read back as the instance written")


SUMMARY_COLUMNS = [
    "item", "file", "days", "censored_days", "censored_share", "missing_days", "sales_mean", "chosen",
    "mean", "variance", "distance",
    "poisson_mean", "poisson_loglik", "poisson_aic", "poisson_distance",
    "negative_binomial_mean", "negative_binomial_variance", "negative_binomial_loglik",
    "negative_binomial_aic", "negative_binomial_distance",
    "kaplan_meier_mean", "kaplan_meier_params", "kaplan_meier_loglik", "kaplan_meier_aic",
    "kaplan_meier_tail_mass", "warnings",
]


def summary_row(fit: ItemFit, path: Path) -> dict[str, Any]:
    d = fit.to_dict()
    row: dict[str, Any] = {k: d[k] for k in ("item", "days", "censored_days", "censored_share", "missing_days",
                                              "sales_mean", "chosen", "mean", "variance", "distance")}
    row["file"] = str(path)
    for fam, f in d["fits"].items():
        row[f"{fam}_mean"] = f["mean"]
        row[f"{fam}_loglik"] = f["loglik"]
        row[f"{fam}_aic"] = f["aic"]
        if fam != "kaplan_meier":
            row[f"{fam}_distance"] = f["distance"]
    row["negative_binomial_variance"] = d["fits"]["negative_binomial"]["variance"]
    row["kaplan_meier_params"] = d["fits"]["kaplan_meier"]["n_params"]
    row["kaplan_meier_tail_mass"] = d["fits"]["kaplan_meier"].get("tail_mass")
    row["warnings"] = " | ".join(fit.warnings)
    return row


def write_summary_csv(rows: list[dict[str, Any]], path: Path) -> None:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SUMMARY_COLUMNS, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: ("" if r.get(k) is None else r[k]) for k in SUMMARY_COLUMNS})
    atomic_write_text(path, buf.getvalue())


_SHORT = {"poisson": "poisson", "negative_binomial": "neg.binomial", "kaplan_meier": "kaplan-meier"}


def _f(x: Any, fmt: str) -> str:
    return "-" if x is None or (isinstance(x, float) and not math.isfinite(x)) else format(x, fmt)


def format_summary(fits: list[ItemFit]) -> list[str]:
    """Console table: one row per item, then the warnings item by item."""
    w = max([len("item")] + [len(f.item) for f in fits])
    head = (f"{'item':<{w}}  {'days':>5} {'cens%':>5} {'sales':>6}  {'AIC poisson':>11} {'AIC negbin':>11} "
            f"{'AIC K-M (k)':>15}  {'chosen':<12} {'mean':>7} {'var':>8} {'dist':>5}")
    lines = [head, "-" * len(head)]
    for f in fits:
        km = f.fits["kaplan_meier"]
        km_txt = f"{_f(km.aic, '.1f')} ({km.n_params})" if km.usable else "-"
        c = f.chosen_fit
        lines.append(
            f"{f.item:<{w}}  {f.days:>5} {100 * f.censored_share:>5.1f} {f.sales_mean:>6.2f}  "
            f"{_f(f.fits['poisson'].aic, '.1f'):>11} {_f(f.fits['negative_binomial'].aic, '.1f'):>11} "
            f"{km_txt:>15}  {_SHORT[f.chosen]:<12} {c.mean:>7.3f} {c.variance:>8.3f} "
            f"{_f(f.distances[f.chosen], '.3f'):>5}")
    warned = [f for f in fits if f.warnings]
    if warned:
        lines.append("")
        for f in warned:
            for msg in f.warnings:
                lines.append(f"warning: {f.item}: {msg}")
    return lines
