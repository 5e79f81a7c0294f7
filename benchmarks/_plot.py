"""Anytime plot: test score of the best config so far against wall-clock time, per dataset.

A searching method draws a step line through its incumbents (the best config by
cross-validation at each moment, refitted on the training part and scored on the test part
after the run; the test score never picks the incumbent, so the line can go down). A default,
or a method that only reports its final model, draws one point. matplotlib is imported here
only, and only when a plot is asked for.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any


def anytime_plot(records: list[dict[str, Any]], path: Path, budget_seconds: float) -> Path:
    """Write the anytime plot of raw result ``records`` to ``path`` (PNG).

    Raises
    ------
    ImportError
        If matplotlib is not installed.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    datasets = list(dict.fromkeys(r["dataset"] for r in records))
    methods = list(dict.fromkeys(r["method"] for r in records))
    colours = {m: f"C{i % 10}" for i, m in enumerate(methods)}
    columns = min(4, len(datasets))
    rows = math.ceil(len(datasets) / columns)
    fig, axes = plt.subplots(rows, columns, figsize=(4 * columns, 3 * rows), squeeze=False)
    for ax, dataset in zip(axes.flat, datasets):
        metric = ""
        for record in (r for r in records if r["dataset"] == dataset and r.get("curve")):
            metric = record["metric"]
            times = [point[0] for point in record["curve"]]
            scores = [point[1] for point in record["curve"]]
            colour = colours[record["method"]]
            if record.get("n_trials") is None:  # one final model: a point
                ax.plot(times, scores, "o", color=colour, label=record["method"])
            else:
                ax.step(times + [max(times[-1], record["search_seconds"])],
                        scores + [scores[-1]], where="post", color=colour,
                        label=record["method"])
        ax.axvline(budget_seconds, color="grey", linewidth=0.8, linestyle=":")
        ax.set_title(dataset, fontsize=10)
        ax.set_xlabel("seconds")
        ax.set_ylabel(f"test {metric}")
    for ax in list(axes.flat)[len(datasets):]:
        ax.set_visible(False)
    legend: dict[str, Any] = {}
    for ax in axes.flat:
        for handle, label in zip(*ax.get_legend_handles_labels()):
            legend.setdefault(label, handle)
    handles, labels = list(legend.values()), list(legend)
    fig.legend(handles, labels, loc="lower center", ncol=min(len(labels), 6), fontsize=8)
    fig.tight_layout(rect=(0, 0.06, 1, 1))
    path = Path(path)
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path


__all__ = ["anytime_plot"]
