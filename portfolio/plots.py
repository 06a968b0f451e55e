"""The portfolio report's two figures, of fixed size whatever the number of items: a histogram
of the gaps of the chosen policies, and the regret per alternative law (box plot).
"""
from __future__ import annotations

import io
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import pandas as pd  # noqa: E402

from invbench.experiments.store import atomic_write  # noqa: E402

from .summary import gap_bins  # noqa: E402

DPI = 110


def _save(fig: object, path: Path) -> Path:
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format="png", dpi=DPI, bbox_inches="tight")  # type: ignore[attr-defined]
    finally:
        plt.close(fig)  # type: ignore[arg-type]
    atomic_write(path, buf.getvalue())
    return path


def gap_histogram(choice: pd.DataFrame, path: Path, title: str) -> Path | None:
    """Items per gap bin (the console's bins), or None when no item has an optimum."""
    if not choice["gap"].notna().any():
        return None
    bins = gap_bins(choice["gap"])
    fig, ax = plt.subplots(figsize=(7, 3.6))
    ax.bar([b for b, _ in bins], [c for _, c in bins], color="#4a72b0")
    ax.set_xlabel("gap of the chosen policy to the optimum (% of the optimal cost)")
    ax.set_ylabel("items")
    ax.set_title(f"{title}: gap of the chosen policy per item")
    for i, (_, c) in enumerate(bins):
        if c:
            ax.annotate(str(c), (i, c), ha="center", va="bottom", fontsize=8)
    return _save(fig, path)


def regret_chart(robust: pd.DataFrame, path: Path, title: str) -> Path | None:
    """Distribution of the relative regret (%) per alternative, one box each, or None."""
    ok = robust[(robust["status"] == "ok") & robust["regret_rel"].notna()] if len(robust) else robust
    if not len(ok):
        return None
    kinds = list(dict.fromkeys(ok["alternative"]))
    data = [100 * ok.loc[ok["alternative"] == k, "regret_rel"].to_numpy(float) for k in kinds]
    fig, ax = plt.subplots(figsize=(7, 3.6))
    try:
        ax.boxplot(data, orientation="horizontal", whis=(5, 95), showfliers=True)
    except TypeError:  # matplotlib < 3.10 names it `vert`
        ax.boxplot(data, vert=False, whis=(5, 95), showfliers=True)
    ax.set_yticks(range(1, len(kinds) + 1), [f"{k} ({len(d)})" for k, d in zip(kinds, data)])
    ax.set_xlabel("regret: cost on the alternative above its own optimum (% of that optimum)")
    ax.set_title(f"{title}: regret of the chosen policy when demand follows another law")
    if max(float(d.max()) for d in data) > 20 * max(float(pd.Series(d).median()) for d in data) + 1:
        ax.set_xscale("symlog", linthresh=0.1)  # a few large regrets would hide all the others
    return _save(fig, path)
