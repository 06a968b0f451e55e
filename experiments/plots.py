"""The report's figures, drawn from a results table and the cell records (matplotlib, Agg).

Each function writes one PNG and returns its path, or None when the run has nothing to draw
for it (e.g. no agent cells: no learning curves); with `formats` ("svg", "pdf") the same figure
is also written next to it in those vector formats, for papers. Every figure has a title, axis
labels with units and a legend.
"""
from __future__ import annotations

import io
import math
from pathlib import Path
from typing import Any

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

DPI = 110
#: Instance fields that may vary across a sweep; all but the swept one split it into panels.
SWEEP_GROUP_FIELDS = ("model", "holding_cost", "shortage_cost", "unit_order_cost", "fixed_order_cost",
                      "case_pack", "demand")


#: Vector formats a figure can also be written in (matplotlib's own backends).
FIGURE_FORMATS = ("svg", "pdf")


def _save(fig: Any, path: Path, formats: tuple[str, ...] = ()) -> Path:
    from .store import atomic_write  # late: the store does not need matplotlib

    out: dict[Path, bytes] = {}
    try:
        for fmt in ("png", *[f for f in formats if f in FIGURE_FORMATS]):
            buf = io.BytesIO()
            # metadata: no creation date, so the same results give the same files
            meta = {"CreationDate": None} if fmt == "pdf" else {"Date": None} if fmt == "svg" else {}
            with plt.rc_context({"svg.hashsalt": "invbench"}):  # fixed ids in the SVG, not random ones
                fig.savefig(buf, format=fmt, dpi=DPI, bbox_inches="tight", metadata=meta)
            out[path.with_suffix(f".{fmt}")] = buf.getvalue()
    finally:
        plt.close(fig)
    for p, data in out.items():
        atomic_write(p, data)  # a killed report never leaves half a figure
    return path


def policy_gaps(df: pd.DataFrame) -> pd.DataFrame:
    """Mean gap (%) and whisker (%) per (instance, policy), non-optimum cells with a known gap.

    Whisker: the 95 % CI of the evaluation for one seed; over several seeds, the 95 % t-interval
    of the mean across seeds (the spread of training outcomes dominates the evaluation noise).
    """
    from scipy import stats

    ok = df[(df["status"] == "ok") & (df["kind"] != "optimum") & df["gap"].notna()]
    rows = []
    for (inst, pol), g in ok.groupby(["instance", "policy"], sort=False):
        gaps = g["gap"].to_numpy(float) * 100
        if len(gaps) == 1:
            half = float(g["gap_ci"].fillna(0).iloc[0]) * 100
        else:
            half = float(stats.t.ppf(0.975, len(gaps) - 1) * gaps.std(ddof=1) / math.sqrt(len(gaps)))
        rows.append({"instance": inst, "policy": pol, "gap_pct": float(gaps.mean()), "half_pct": half,
                     "seeds": len(gaps), "lead_time": g["lead_time"].iloc[0],
                     **{f: g[f].iloc[0] for f in SWEEP_GROUP_FIELDS if f in g}})
    return pd.DataFrame(rows)


def gap_chart(df: pd.DataFrame, path: Path, suite: str, formats: tuple[str, ...] = ()) -> Path | None:
    """Grouped bars: gap to the optimum per instance (groups) and policy (colours), CI whiskers."""
    g = policy_gaps(df)
    if g.empty:
        return None
    instances = list(dict.fromkeys(g["instance"]))
    policies = list(dict.fromkeys(g["policy"]))
    width = 0.8 / len(policies)
    fig, ax = plt.subplots(figsize=(max(8.0, 0.55 * len(instances) * max(1, len(policies) / 3)), 5.2))
    x = np.arange(len(instances))
    cmap = plt.get_cmap("tab10")
    small = len(instances) * len(policies) <= 40
    for j, pol in enumerate(policies):
        sub = g[g["policy"] == pol].set_index("instance").reindex(instances)
        xs = x + (j - (len(policies) - 1) / 2) * width
        ax.bar(xs, sub["gap_pct"], width, yerr=sub["half_pct"], capsize=2, label=pol, color=cmap(j % 10),
               error_kw={"elinewidth": 1})
        for xi, v in zip(xs, sub["gap_pct"]):
            if small and pd.notna(v):  # values on the bars: a zero-gap bar is otherwise invisible
                ax.annotate(f"{v:.1f}" if abs(v) >= 0.05 else "0", (xi, max(v, 0.0)), ha="center",
                            va="bottom", fontsize=6, xytext=(0, 2), textcoords="offset points")
    ax.set_xticks(x, instances, rotation=30 if len(instances) > 3 else 0, ha="right" if len(instances) > 3 else "center")
    top = float(np.nanmax(g["gap_pct"] + g["half_pct"]))
    bottom = float(np.nanmin(np.minimum(g["gap_pct"] - g["half_pct"], 0.0)))
    if top > 20:  # one bad policy must not flatten the bars of the good ones
        ax.set_yscale("symlog", linthresh=1.0)
        ax.set_ylim(bottom * 1.5 if bottom < 0 else 0.0, top * 2.0)
        ax.set_ylabel("gap to optimum (%, symmetric log scale; labels in %)")
    else:
        ax.set_ylim(bottom * 1.2 if bottom < 0 else 0.0, max(top * 1.15, 0.5))
        ax.set_ylabel("gap to optimum (%; labels in %)")
    ax.set_xlabel("instance")
    ax.axhline(0, color="black", linewidth=0.8)
    ax.set_title(f"Gap to the certified optimum per instance and policy — suite {suite}\n"
                 "(average cost per period; whiskers: 95% confidence interval)")
    ax.legend(title="policy", fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    ax.grid(axis="y", alpha=0.3)
    return _save(fig, path, formats)


def learning_curves(curves: list[dict[str, Any]], optimum: dict[str, float], path: Path,
                    formats: tuple[str, ...] = ()) -> Path | None:
    """Cost of the greedy policy vs training steps, one panel per instance, optimum dashed."""
    curves = [c for c in curves if c.get("rows")]
    if not curves:
        return None
    instances = list(dict.fromkeys(c["instance"] for c in curves))
    ncol = min(3, len(instances))
    nrow = math.ceil(len(instances) / ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(5.2 * ncol, 3.8 * nrow), squeeze=False)
    for ax, inst in zip(axes.flat, instances):
        costs = []
        for c in (c for c in curves if c["instance"] == inst):
            rows = [r for r in c["rows"] if r.get("step") is not None and r.get("cost") is not None]
            costs += [r["cost"] for r in rows]
            ax.plot([r["step"] for r in rows], [r["cost"] for r in rows], marker=".", linewidth=1.2,
                    label=f"{c['policy']} (seed {c['seed']})")
        if inst in optimum:
            ax.axhline(optimum[inst], color="black", linestyle="--", linewidth=1, label="optimum")
            costs.append(optimum[inst])
        lo, hi = (min(costs), max(costs)) if costs else (0.0, 0.0)
        log = lo > 0 and hi / lo > 10  # one awful early policy must not flatten the rest
        if log:
            ax.set_yscale("log")
        ax.set_title(inst, fontsize=10)
        ax.set_xlabel("training steps (periods simulated)")
        ax.set_ylabel("cost per period" + (" (log scale)" if log else ""))
        ax.grid(alpha=0.3)
        ax.legend(fontsize=8)
    for ax in list(axes.flat)[len(instances):]:
        ax.set_visible(False)
    fig.suptitle("Learning curves: cost of the greedy policy during training", fontsize=12)
    fig.tight_layout()
    return _save(fig, path, formats)


def policy_map_chart(instance: str, optimal: dict[str, Any], other: dict[str, Any], other_label: str,
                     path: Path, formats: tuple[str, ...] = ()) -> Path:
    """Optimal order, the other policy's order and their difference over on-hand x pipeline."""
    a = np.asarray(optimal["orders"], dtype=float)
    b = np.asarray(other["orders"], dtype=float)
    on_hand, pipe = optimal["on_hand"], optimal["pipeline"]
    extent = (on_hand[0] - 0.5, on_hand[-1] + 0.5, pipe[0] - 0.5, pipe[-1] + 0.5)
    vmax = max(float(a.max()), float(b.max()), 1.0)
    diff = b - a
    dmax = max(float(np.abs(diff).max()), 1.0)
    fig, axes = plt.subplots(1, 3, figsize=(15, 4.6))
    panels = [(a, "optimal order", "viridis", 0, vmax), (b, f"{other_label} order", "viridis", 0, vmax),
              (diff, f"{other_label} minus optimal", "RdBu_r", -dmax, dmax)]
    for ax, (img, title, cmap, lo, hi) in zip(axes, panels):
        im = ax.imshow(img, origin="lower", extent=extent, cmap=cmap, vmin=lo, vmax=hi, aspect="auto")
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        ax.yaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_title(title, fontsize=10)
        ax.set_xlabel("on-hand stock (units)")
        ax.set_ylabel("pipeline total (units in transit)")
        cb = fig.colorbar(im, ax=ax)
        cb.set_label("order (units)" if lo == 0 else "difference (units)")
    share = float(np.mean(diff != 0)) * 100
    fig.suptitle(f"Policy map on {instance}: optimal vs {other_label} "
                 f"(orders differ on {share:.0f}% of the grid; pipeline spread evenly over the orders in transit)",
                 fontsize=11)
    fig.tight_layout()
    return _save(fig, path, formats)


def gap_vs_lead_time(df: pd.DataFrame, path: Path, suite: str,
                     formats: tuple[str, ...] = ()) -> Path | None:
    """Gap (%) vs lead time, one line per policy; one panel per setting of the other fields."""
    g = policy_gaps(df)
    if g.empty or g["lead_time"].nunique() < 2:
        return None
    group_fields = [f for f in SWEEP_GROUP_FIELDS if f in g and g[f].nunique() > 1]
    groups = list(g.groupby(group_fields, sort=True)) if group_fields else [((), g)]
    ncol = min(4, len(groups))
    nrow = math.ceil(len(groups) / ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.6 * ncol + 1, 3.8 * nrow), squeeze=False, sharey=True)
    policies = list(dict.fromkeys(g["policy"]))
    cmap = plt.get_cmap("tab10")
    for ax, (key, sub) in zip(axes.flat, groups):
        key = key if isinstance(key, tuple) else (key,)
        for j, pol in enumerate(policies):
            s = sub[sub["policy"] == pol].sort_values("lead_time")
            if s.empty:
                continue
            ax.errorbar(s["lead_time"], s["gap_pct"], yerr=s["half_pct"], marker="o", capsize=2,
                        color=cmap(j % 10), label=pol)
        shown = group_fields or [f for f in SWEEP_GROUP_FIELDS if f in sub and sub[f].nunique() == 1
                                 and f not in ("unit_order_cost", "fixed_order_cost", "case_pack")]
        vals = key if group_fields else tuple(sub[f].iloc[0] for f in shown)
        ax.set_title(", ".join(f"{_short(f)}={_fmt(v)}" for f, v in zip(shown, vals)), fontsize=10)
        if float(np.nanmax(sub["gap_pct"] + sub["half_pct"])) > 20:  # keep the small gaps readable
            ax.set_yscale("symlog", linthresh=1.0)
        ax.set_xlabel("lead time L (periods)")
        ax.set_xticks(sorted(int(v) for v in sub["lead_time"].unique()))
        ax.grid(alpha=0.3)
    for ax in axes[:, 0]:
        log = ax.get_yscale() == "symlog"
        ax.set_ylabel("gap to optimum (%" + (", symmetric log scale)" if log else ")"))
    for ax in list(axes.flat)[len(groups):]:
        ax.set_visible(False)
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, title="policy", loc="center left", bbox_to_anchor=(1.0, 0.5), fontsize=9)
    fig.suptitle(f"Gap to the optimum vs lead time — suite {suite}", fontsize=12)
    fig.tight_layout()
    return _save(fig, path, formats)


def _short(field: str) -> str:
    return {"shortage_cost": "p", "holding_cost": "h", "fixed_order_cost": "K",
            "unit_order_cost": "c", "case_pack": "q"}.get(field, field)


def _fmt(v: Any) -> str:
    return f"{v:g}" if isinstance(v, (float, np.floating)) else str(v)
