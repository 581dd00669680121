"""The trajectory figure (matplotlib, Agg): observed paths of sampled persons and each fit's mean curve.

Pure: draws a `bridge.reconcile.curves.TrajectoryData`. The SEM's curve is solid, the mixed
model's dashed; when both fits agree the two lie on top of each other. SVG output is
deterministic (no date, fixed element ids).
"""
from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
from matplotlib.figure import Figure  # noqa: E402

from ..reconcile.curves import TrajectoryData  # noqa: E402

_GROUP_COLOURS = ("#2f5d8a", "#b5542b", "#3f7f4f", "#7a4f8f", "#8a7a2f", "#2f7f7f")
_FORM_STYLE = {"sem": ("-", "wide form (SEM)"), "mixed": ("--", "long form (mixed model)")}


def plain_text(text: str) -> str:
    """User text shown literally by matplotlib (a `$` would start math mode)."""
    return text.replace("$", r"\$")


def _colour(data: TrajectoryData, group: str) -> str:
    index = data.groups.index(group) if group in data.groups else len(data.groups)
    return _GROUP_COLOURS[index % len(_GROUP_COLOURS)]


def trajectory_figure(data: TrajectoryData) -> Figure:
    """Individual paths (thin, faint) under the implied mean curves of both fits."""
    with plt.rc_context({"svg.hashsalt": "sembridge", "font.family": "DejaVu Sans", "font.size": 9}):
        figure = Figure(figsize=(7.0, 4.4), dpi=100)
        axes = figure.add_subplot()
        for path in data.persons:
            axes.plot(path.times, path.values, color=_colour(data, path.group), alpha=0.22, linewidth=0.8,
                      marker="o", markersize=2)
        for curve in data.curves:
            style, form = _FORM_STYLE[curve.form]
            label = form if len(data.groups) == 1 else f"{form}: {plain_text(curve.group)}"
            axes.plot(curve.times, curve.values, linestyle=style, color=_colour(data, curve.group),
                      linewidth=2.2 if curve.form == "sem" else 1.6, label=label)
        shown = len(data.persons)
        sample = "every person" if shown == data.persons_total else f"{shown} of {data.persons_total} persons"
        axes.set_title(f"Observed {plain_text(data.outcome)} ({sample}) and the mean each fit implies", loc="left")
        axes.set_xlabel(plain_text(data.time))
        axes.set_ylabel(plain_text(data.outcome))
        axes.legend(loc="best", frameon=False, fontsize=8)
        if data.note:
            figure.text(0.01, 0.01, f"Curves with {plain_text(data.note)}.", fontsize=7, color="#555555")
        axes.spines[["top", "right"]].set_visible(False)
        figure.tight_layout()
    return figure


def figure_bytes(figure: Figure, fmt: str) -> bytes:
    """The figure as SVG or PNG bytes, without dates or varying ids."""
    buffer = io.BytesIO()
    metadata = {"Date": None} if fmt == "svg" else {"Software": None} if fmt == "png" else {}
    with plt.rc_context({"svg.hashsalt": "sembridge"}):
        figure.savefig(buffer, format=fmt, metadata=metadata)
    return buffer.getvalue()


def trajectory_files(data: TrajectoryData, stem: str = "trajectories") -> dict[str, bytes]:
    """SVG and PNG of the trajectory figure, by file name."""
    figure = trajectory_figure(data)
    return {f"{stem}.{fmt}": figure_bytes(figure, fmt) for fmt in ("svg", "png")}
