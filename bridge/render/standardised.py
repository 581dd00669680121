"""The standardised-paths figure (matplotlib, Agg): auto- and cross-lagged paths over waves, both forms.

Pure: draws a `StandardisedPaths` (bridge/families/cross_lagged/standardised.py). Two panels side by side,
the wide form (SEM) left and the long form right, on a shared vertical axis. Wave-specific
paths are points joined by thin lines, one point per wave; a time-invariant path is one
horizontal line across the waves. SVG output is deterministic (no date, fixed ids).
"""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
from matplotlib.figure import Figure  # noqa: E402

from .trajectory import plain_text, figure_bytes  # noqa: E402

_COLOURS = ("#2f5d8a", "#b5542b", "#3f7f4f", "#7a4f8f", "#8a7a2f", "#2f7f7f")
_FORMS = (("sem", "wide form (SEM)"), ("mixed", "long form (lagged regressions)"))


def _name(path) -> str:
    return plain_text(f"{path.source} → {path.target}")


def standardised_figure(data) -> Figure:
    """Both forms' standardised paths, one colour per path."""
    keys = list(dict.fromkeys(p.key for p in data.paths))
    with plt.rc_context({"svg.hashsalt": "sembridge", "font.family": "DejaVu Sans", "font.size": 9}):
        figure = Figure(figsize=(8.4, 3.8), dpi=100)
        axes = figure.subplots(1, 2, sharey=True)
        for ax, (form, title) in zip(axes, _FORMS):
            ax.axhline(0.0, color="#999999", linewidth=0.6)
            for path in (p for p in data.paths if p.form == form):
                colour = _COLOURS[keys.index(path.key) % len(_COLOURS)]
                if data.time_invariant:
                    ax.plot(path.waves, path.values, color=colour, linewidth=2.0, label=_name(path))
                else:
                    ax.plot(path.waves, path.values, color=colour, linewidth=0.9, marker="o", markersize=4,
                            label=_name(path))
            ax.set_title(title, loc="left")
            ax.set_xlabel(f"{plain_text(data.time)} of the outcome")
            ax.set_xlim(data.first_wave - 0.3, data.last_wave + 0.3)
            ax.spines[["top", "right"]].set_visible(False)
        axes[0].set_ylabel("standardised path")
        axes[1].legend(loc="best", frameon=False, fontsize=8)
        figure.text(0.01, 0.01, f"Standardised: {plain_text(data.note)}.", fontsize=7, color="#555555")
        figure.tight_layout(rect=(0, 0.04, 1, 1))
    return figure


def standardised_files(data, stem: str = "standardised-paths") -> dict[str, bytes]:
    """SVG and PNG of the standardised-paths figure, by file name."""
    figure = standardised_figure(data)
    return {f"{stem}.{fmt}": figure_bytes(figure, fmt) for fmt in ("svg", "png")}
