"""Latency against corpus size, one small panel per suite query, log axes.

Why: a table per scale hides how time grows; on log axes a line parallel to the dotted
linear guide grows linearly with the corpus, a steeper one worse than linearly.
"""
from __future__ import annotations

import math
from collections import defaultdict
from pathlib import Path

SIDES = (("strata_s", "strata", "-"), ("hand_sql_s", "hand SQL", "--"),
         ("floor_s", "scan floor", ":"), ("pandas_s", "pandas", "-."), ("limit20_s", "strata limit 20", "-"))


def plot_latency(report: dict, path: Path) -> Path:
    """Write the figure to ``path`` (PNG) without a display (Agg backend)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    by_query: dict[str, list[dict]] = defaultdict(list)
    for r in report["records"]:
        if r["status"] != "skipped":
            by_query[r["query"]].append(r)
    names = sorted(by_query)
    cols = 4
    rows = max(1, math.ceil(len(names) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(4 * cols, 3 * rows), squeeze=False)
    for ax, name in zip(axes.flat, names):
        rs = sorted(by_query[name], key=lambda r: r["tokens"])
        xs = [r["tokens"] for r in rs]
        for key, label, style in SIDES:
            pts = [(x, r[key]) for x, r in zip(xs, rs) if r.get(key)]
            if pts:
                ax.plot(*zip(*pts), style, marker="o", markersize=3, label=label)
        first = next((r for r in rs if r.get("strata_s")), None)
        if first is not None and len(xs) > 1:   # a linear-growth guide through the first strata point
            ax.plot([xs[0], xs[-1]], [first["strata_s"], first["strata_s"] * xs[-1] / xs[0]],
                    color="grey", linewidth=0.6, linestyle=(0, (1, 3)), label="linear")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_title(name, fontsize=8)
        ax.tick_params(labelsize=7)
        ax.set_xlabel("tokens", fontsize=7)
        ax.set_ylabel("seconds", fontsize=7)
    for ax in list(axes.flat)[len(names):]:
        ax.axis("off")
    if names:
        handles, labels = axes.flat[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="lower center", ncol=len(labels), fontsize=8)
    fig.suptitle(f"strata query suite: median of {report.get('runs', '?')} runs per side", fontsize=10)
    fig.tight_layout(rect=(0, 0.05, 1, 0.97))
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path
